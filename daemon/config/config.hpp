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

#include "daemon/protocol/codec.hpp"
#include "daemon/protocol/reading.hpp"
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
};

struct Config {
  // [daemon]
  std::string log_level = "info";   // trace | debug | info | warn | error
  std::string ingest_endpoint;      // empty: ipc://DIR/ingest.sock
  std::string control_endpoint;     // empty: ipc://DIR/control.sock
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

  const SourceConfig* find_source(std::string_view name) const;
};

struct ConfigError {
  std::size_t line = 0;  // 1-based; 0 when the error has no place in the file
  std::string key;       // dotted, e.g. "sample[2].squares"
  std::string message;
};

// Parses and validates; the config is only meaningful when no error is returned.
std::vector<ConfigError> parse_config(std::string_view text, Config& out);
std::vector<ConfigError> load_config_file(const std::string& path, Config& out);

// "FILE:LINE: key: message"
std::string format_error(std::string_view file, const ConfigError& error);

// A complete, commented config that parses as printed.
std::string_view example_config();

}  // namespace lphi::config
