#include "daemon/config/config.hpp"

#include <string>

namespace lphi::config {

namespace {

constexpr std::string_view daemon_part = R"toml(# lphid configuration (TOML). Unknown keys are errors.
# Check a file with: lphid --check-config FILE

[daemon]
log_level = "info"          # trace | debug | info | warn | error
# Endpoints default to ipc:// sockets inside the data directory (mode 0660).
# tcp:// may be given instead, e.g. "tcp://127.0.0.1:5555".
ingest_endpoint = ""        # "" means ipc://DATA_DIR/ingest.sock
control_endpoint = ""       # "" means ipc://DATA_DIR/control.sock
events_endpoint = ""        # "" means ipc://DATA_DIR/events.sock (publishes sweeps, fits, verdicts, alerts)

[store]
synchronous = "normal"      # normal: survives a crash of lphid; full: also a power cut
commit_max_readings = 20000 # a transaction holds at most this many readings
commit_max_ms = 50          # ... and is open at most this long
queue_max_readings = 200000 # readings waiting for the writer; beyond this, no acks (back-pressure)
checkpoint_interval_ms = 500

[ingest]
max_frame_bytes = 4194304   # larger messages are refused (frame_too_large)
max_batch_readings = 10000  # larger batches are refused (batch_too_large)
max_name_bytes = 64
time_backward_tolerance_s = 60.0   # t may run back this far behind a source's last reading
time_future_tolerance_s = 86400.0  # t may lie this far ahead of lphid's clock

# A source's readings come over the ingest socket (lab scripts, lphi send),
# unless the source has a driver: then lphid reads the instrument itself.
[[source]]
name = "lockin-a"
kind = "lockin"             # lockin | thermometer | field
# time_future_tolerance_s = 86400.0  # this source's own [ingest] tolerance
driver = "scpi-tcp"         # scpi-tcp (lphid polls) | line-stream (the instrument pushes lines)
address = "127.0.0.1:5025"  # host:port
poll_interval_ms = 200      # one reading per poll, on a fixed schedule
reply_timeout_ms = 1000     # per query; a timeout closes the connection and reconnects
connect_timeout_ms = 2000
reconnect_min_ms = 250      # reconnect delays double from this, with jitter,
reconnect_max_ms = 30000    # ... up to this
stall_after_ms = 5000       # connected, but no reading for this long: "stalled" in lphi status
terminator = "\n"           # "\n" or "\r\n"
identity_query = "*IDN?"    # asked on every connect, stored; "" asks nothing
buffer_readings = 10000     # kept while the store falls behind; beyond, dropped (a gap)
# Each poll sends the queries in order; each field of the comma-separated
# reply maps to a quantity, in SI after `scale`. time_s is the instrument's
# own clock (s since the Unix epoch); without it a reading gets its arrival time.
[[source.query]]
send = "MEAS:ALL?"
[[source.query.field]]
index = 0
quantity = "time_s"
[[source.query.field]]
index = 1
quantity = "x_v"            # x_v, y_v (required), frequency_hz, range_v, time_constant_s, overload
[[source.query.field]]
index = 2
quantity = "y_v"
scale = 1.0                 # value in SI = scale * value sent (1e-6 for a reply in uV)
# A line-stream source instead has mode = "connect" | "listen",
# format = "csv" | "json", silence_timeout_ms, and [[source.field]] tables
# (index for csv, key for json; quantity; scale).

[[source]]
name = "mxc"
kind = "thermometer"

[[source]]
name = "magnet"
kind = "field"

[[sample]]
name = "film-a"
model = "hln2d"             # hln2d | hln2d-so | wire1d | kawabata3d
squares = 5.0               # length/width between the voltage probes
width_m = 20e-6
thickness_m = 10e-9
excitation_a = 10e-9        # rms current
lockin = "lockin-a"
thermometer = "mxc"
field = "magnet"
# optional:
# gain = 100.0              # preamplifier gain, divided out of x_v and y_v
# diffusion_m2s = 1e-3
# mean_free_path_m = 5e-9
# alpha_fixed = -0.5
# Live analysis (these are the defaults):
# max_age_temperature_s = 30.0   # a lock-in reading needs a thermometer reading this recent on each side
# max_hold_s = 60.0              # how far the three streams may lag each other in time
# sweep_min_points = 20          # a sweep holds at least this many lock-in readings
# Automatic unless set (lphi status shows the values in force, per sample):
# max_age_field_s = 2.0          # ... and a field reading. Automatic: 5 times the median interval
#                                # between field readings, at least 2 s, at most 30 s
# sweep_min_span_t = 0.01        # a sweep passes through zero field and reaches span/2 on at
#                                # least one side (two-sided or one-sided). Automatic: span/2 is a
#                                # tenth of the largest |B| of the last 16 runs, at least 5 tolerances
# reversal_tolerance_t = 1e-5    # field noise that does not end a sweep. Automatic: 20 times the
#                                # field readings' noise, at least 1 uT, at most 2 mT
# field_step_t = 0.0             # a field step this large settles the lock-in again; 0: off
# plateau_relative_spread = 0.02 # (T_max - T_min)/T_mean within one temperature plateau
# plateau_min_duration_s = 300.0
# settling_time_constants = 5.0  # readings within 5 lock-in time constants after a change are dropped
# settling_unknown_tau_s = 1.0   # the time constant assumed when the lock-in does not report one
# combine_up_down = false        # fit an up sweep and the next down sweep of one plateau together
# fit_background = false         # also fit a classical c*B^2 term
# probe_length_m = 100e-6        # between the voltage probes, for the heating check
# fit_window_t = 0.05            # a fixed field window instead of the automatic one
# excitation_ratio_max = 1.0     # e V/(k_B T) at or above this is a heating risk
# quadrature_ratio_max = 0.1     # |Y/X| above this is large
# new_cooldown_above_k = 30.0    # warmed above this for a minute (from below half of it): the next
#                                # sweeps are a new cooldown, whose L_phi(T) and verdict leave the last one's out
)toml";

}  // namespace

std::string_view example_config() {
  // The [alerts] table is documented by the alert rules' own example.
  static const std::string text =
      std::string(daemon_part) + "\n" + std::string(alerts::example_alert_config());
  return text;
}

}  // namespace lphi::config
