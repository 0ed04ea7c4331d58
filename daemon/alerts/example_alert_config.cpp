#include "daemon/alerts/alert_config.hpp"

namespace lphi::alerts {

std::string_view example_alert_config() {
  return R"toml(# ---------------------------------------------------------------------------
# Alerts. Every rule has its own table below with
#   enabled     = true | false
#   severity    = "info" | "warning" | "critical"
#   clear_after = how many consecutive good observations (fits, sweeps,
#                 verdicts or health ticks, whichever the rule watches)
#                 clear a live alert
# and a rule that compares a value with a limit has a hysteresis: the
# fraction of the limit by which the value must be back inside to count as
# good, so that a value flapping around the limit raises one alert.
# Rules on fits, sweeps and verdicts judge event time (a replay raises the
# same alerts); source-silent, gap, disk-space and writer-lag use the clock.
[alerts]
# A program run once per alert change with the alert as JSON on stdin, e.g.
# ["/usr/local/bin/notify-lab", "--room", "fridge"]. No shell; [] for none.
hook_command = []
hook_timeout_s = 10.0      # then it is stopped (SIGTERM, 2 s later SIGKILL)
hook_max_per_minute = 10   # more runs in any 60 s are dropped and counted
hook_queue = 64            # alert changes waiting for the hook; more are dropped

[alerts.lphi-range]        # a fitted L_phi outside [min_m, max_m]
enabled = true
severity = "warning"
clear_after = 2
min_m = 10e-9
max_m = 100e-6
hysteresis = 0.1

[alerts.fit-failed]        # a sweep fit failed or did not converge
enabled = true
severity = "warning"
clear_after = 2

[alerts.fit-chi2]          # a fit's reduced chi-square above max_chi2_red
enabled = true
severity = "warning"
clear_after = 2
max_chi2_red = 3.0
hysteresis = 0.2

[alerts.field-offset]      # the field offset or lag of a sweep above max_fraction of B_phi
enabled = true
severity = "warning"
clear_after = 2
max_fraction = 0.2
hysteresis = 0.2

[alerts.verdict-saturating]  # the verdict enters "saturating"
enabled = true
severity = "info"
clear_after = 2

[alerts.verdict-saturated]   # the verdict enters "saturated"
enabled = true
severity = "warning"
clear_after = 2

[alerts.electrons-not-cooling]  # sigma(0) says the electrons stopped cooling
enabled = true
severity = "critical"
clear_after = 2

[alerts.temperature-unstable]  # a sweep straddled a temperature change
enabled = true
severity = "info"
clear_after = 2

[alerts.lockin-overload]   # a sweep with more than max_points overloaded points
enabled = true
severity = "warning"
clear_after = 2
max_points = 0

[alerts.quadrature]        # max |Y/X| over a sweep above max_ratio
enabled = true
severity = "warning"
clear_after = 2
max_ratio = 0.1
hysteresis = 0.2

[alerts.excitation-heating]  # e V / k_B T at the sweep's temperature above max_ratio
enabled = true
severity = "warning"
clear_after = 2
max_ratio = 1.0
hysteresis = 0.1

[alerts.source-silent]     # no reading from a source for silent_s seconds
enabled = true
severity = "critical"
clear_after = 1
silent_s = 120.0

[alerts.gap]               # new gaps in a source's sequence numbers
enabled = true
severity = "warning"
clear_after = 1
quiet_s = 600.0            # health ticks count as good once no gap came for this long

[alerts.disk-space]        # free space on the data directory's file system
enabled = true
severity = "critical"
clear_after = 1
min_free_bytes = 2e9
hysteresis = 0.1

[alerts.writer-lag]        # the store writer behind the readings by more than max_lag_s
enabled = true
severity = "warning"
clear_after = 3
max_lag_s = 10.0
hysteresis = 0.5
)toml";
}

}  // namespace lphi::alerts
