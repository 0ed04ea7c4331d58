// lphid's configuration: one TOML file with comments, edited by people.
//
// Every key is checked: a wrong type, a value out of range, a sample naming a
// source that does not exist or is of the wrong kind, and any key lphid does
// not know (a typo must not be silently ignored) is an error naming the file,
// the line and the dotted key. The keys and their defaults are listed, with
// comments, by example_config(), which parses as printed.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "schema/protocol/codec.hpp"
#include "schema/protocol/reading.hpp"
#include "schema/text/toml_keys.hpp"
#include "drivers/instrument/driver_config.hpp"

namespace lphi::config {

// How lphid itself reads a source: not at all (its readings come over the
// ingest socket), or with one of the instrument drivers of drivers/instrument/.
enum class DriverType { none, scpi_tcp, line_stream };

std::string_view driver_type_name(DriverType type);

struct SourceConfig {
  std::string name;
  protocol::SourceKind kind = protocol::SourceKind::lockin;
  // Overrides [ingest] time_future_tolerance_s for this source, e.g. for a
  // simulated instrument whose accelerated clock runs ahead of lphid's.
  std::optional<double> time_future_tolerance_s;
  DriverType driver = DriverType::none;
  // The driver's settings, `source` and `kind` filled in; only the one named
  // by `driver` is meaningful. outlet.first_seq is set by lphid at start.
  drivers::ScpiTcpConfig scpi_tcp;
  drivers::LineStreamConfig line_stream;
};

struct SampleConfig {
  std::string name;
  std::string model;  // hln2d | hln2d-so | wire1d | kawabata3d
  double squares = 0.0;
  double width_m = 0.0;
  double thickness_m = 0.0;
  double excitation_a = 0.0;
  std::string lockin, thermometer, field;
  std::optional<double> gain, diffusion_m2s, mean_free_path_m, alpha_fixed;
  // Live analysis (defaults: those of the analysis option structs,
  // analysis/alignment.hpp and analysis/segmenter.hpp).
  double max_age_temperature_s = 30.0;   // aligning: newest thermometer reading at most this old
  // Unset: automatic, from the data (analysis/alignment.hpp "Field age",
  // analysis/segmenter.hpp "Span and tolerance from the data").
  std::optional<double> max_age_field_s;       // ... and field reading
  double max_hold_s = 60.0;                    // event-time lag tolerated between the three streams
  std::optional<double> sweep_min_span_t;      // a sweep passes zero and reaches span/2 on one side
  std::optional<double> reversal_tolerance_t;  // field noise tolerated without ending a sweep
  std::int64_t sweep_min_points = 20;          // a sweep holds at least this many points
  double field_step_t = 0.0;             // a step this large between readings settles the lock-in; 0 off
  double plateau_relative_spread = 0.02; // (T_max - T_min)/T_mean within a plateau
  double plateau_min_duration_s = 300.0;
  double settling_time_constants = 5.0;  // readings within this many lock-in tau after a change are dropped
  double settling_unknown_tau_s = 1.0;   // tau assumed when the lock-in does not report it
  bool combine_up_down = false;          // fit an up and the following down sweep of a plateau together
  bool fit_background = false;           // classical c*B^2 term
  std::optional<double> probe_length_m;  // length between the voltage probes (heating check)
  std::optional<double> fit_window_t;    // fixed field window instead of the automatic one
  double excitation_ratio_max = 1.0;     // e V/(k_B T) at or above this is a heating risk
  double quadrature_ratio_max = 0.1;     // |Y/X| above this is large
  // Warmed above this (after being below half of it) and cooled again: the
  // next sweeps are a new cooldown, analysed apart from the previous one's.
  double new_cooldown_above_k = 30.0;
};

// One mistake in a config file: its line (1-based; 0 when the error has no
// place in the file), the dotted key ("sample[2].squares") and the message.
using ConfigError = text::TomlError;

}  // namespace lphi::config

namespace lphi::alerts {
struct AlertConfig;  // daemon/alerts/alert_config.hpp, included at the end
}  // namespace lphi::alerts

namespace lphi::config {

// Config is a template only so that daemon/alerts/alert_config.hpp, which
// takes ConfigError from this header, may be included before it: the member
// `alerts` needs AlertConfig complete only where a Config is made.
template <class AlertConfigT = alerts::AlertConfig>
struct BasicConfig {
  // [daemon]
  std::string log_level = "info";   // trace | debug | info | warn | error
  std::string ingest_endpoint;      // empty: ipc://DIR/ingest.sock
  std::string control_endpoint;     // empty: ipc://DIR/control.sock
  std::string events_endpoint;      // empty: ipc://DIR/events.sock
  // [store]
  bool synchronous_full = false;    // synchronous = "normal" | "full"
  std::int64_t commit_max_readings = 20000;
  std::int64_t commit_max_ms = 50;
  std::int64_t queue_max_readings = 200000;
  std::int64_t checkpoint_interval_ms = 500;
  // [ingest]
  protocol::Limits limits;
  double time_backward_tolerance_s = 60.0;  // how far t may run back behind a source's last reading
  double time_future_tolerance_s = 86400.0; // how far t may lie ahead of lphid's clock
  std::vector<SourceConfig> sources;
  std::vector<SampleConfig> samples;
  // [alerts]: parsed by lphi::alerts::parse_alert_config.
  AlertConfigT alerts;

  const SourceConfig* find_source(std::string_view name) const {
    for (const auto& s : sources) {
      if (s.name == name) return &s;
    }
    return nullptr;
  }
};
using Config = BasicConfig<>;

// Parses and validates; the config is only meaningful when no error is returned.
std::vector<ConfigError> parse_config(std::string_view text, Config& out);
std::vector<ConfigError> load_config_file(const std::string& path, Config& out);

// "FILE:LINE: key: message"
std::string format_error(std::string_view file, const ConfigError& error);

// A complete, commented config that parses as printed.
std::string_view example_config();

}  // namespace lphi::config

#include "daemon/alerts/alert_config.hpp"  // after Config: see BasicConfig
