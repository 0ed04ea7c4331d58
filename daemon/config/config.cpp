#include "daemon/config/config.hpp"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <fstream>
#include <functional>
#include <map>
#include <set>
#include <sstream>
#include <toml++/toml.h>

#include "analysis/alignment.hpp"

namespace lphi::config {

namespace {

using Handler = text::TomlKeys::Handler;

// The errors a Checker collects; a base so that they exist before TomlKeys
// refers to them.
struct ErrorList {
  std::vector<ConfigError> errors;
};

// lphi's one TOML key checker (schema/text/toml_keys.hpp) with the handlers
// of the config's value kinds.
class Checker : private ErrorList, public text::TomlKeys {
 public:
  using ErrorList::errors;
  Checker() : text::TomlKeys(ErrorList::errors) {}
  Checker(const Checker&) = delete;
  Checker& operator=(const Checker&) = delete;

  // Visits every key of `table`: known ones through their handler, the rest as errors.
  void table(const toml::table& tbl, const std::string& prefix,
             const std::map<std::string, Handler>& handlers) {
    visit(tbl, prefix, handlers);
  }

  Handler string_to(std::string& out, std::set<std::string> allowed = {}) {
    return [this, &out, allowed](const toml::node& n, const std::string& key) {
      const auto given = string(n, key);
      if (!given) return;
      const std::string& value = *given;
      if (!allowed.empty() && allowed.count(value) == 0) {
        std::string list;
        for (const auto& a : allowed) list += (list.empty() ? "" : ", ") + a;
        return fail(n, key, "must be one of " + list + ", not \"" + value + "\"");
      }
      out = value;
    };
  }

  Handler integer_to(std::int64_t& out, std::int64_t min, std::int64_t max) {
    return [this, &out, min, max](const toml::node& n, const std::string& key) {
      const auto value = integer(n, key);
      if (!value) return;
      const std::int64_t v = *value;
      if (v < min || v > max) {
        return fail(n, key, "must lie between " + std::to_string(min) + " and " + std::to_string(max));
      }
      out = v;
    };
  }

  Handler size_to(std::size_t& out, std::int64_t min, std::int64_t max) {
    return [this, &out, min, max](const toml::node& n, const std::string& key) {
      std::int64_t v = 0;
      std::size_t before = errors.size();
      integer_to(v, min, max)(n, key);
      if (errors.size() == before) out = static_cast<std::size_t>(v);
    };
  }

  Handler positive_to(double& out) {
    return [this, &out](const toml::node& n, const std::string& key) {
      auto v = number(n, key);
      if (!v) return;
      if (!(*v > 0.0)) return fail(n, key, "must be positive");
      out = *v;
    };
  }

  Handler non_negative_to(double& out) {
    return [this, &out](const toml::node& n, const std::string& key) {
      auto v = number(n, key);
      if (!v) return;
      if (!(*v >= 0.0)) return fail(n, key, "must not be negative");
      out = *v;
    };
  }

  Handler bool_to(bool& out) {
    return [this, &out](const toml::node& n, const std::string& key) {
      if (auto v = boolean(n, key)) out = *v;
    };
  }

  Handler optional_positive_to(std::optional<double>& out) {
    return [this, &out](const toml::node& n, const std::string& key) {
      auto v = number(n, key);
      if (!v) return;
      if (!(*v > 0.0)) return fail(n, key, "must be positive");
      out = *v;
    };
  }

  Handler optional_number_to(std::optional<double>& out) {
    return [this, &out](const toml::node& n, const std::string& key) {
      if (auto v = number(n, key)) out = *v;
    };
  }

  // An array of tables, e.g. [[source]]; `each` handles one element.
  Handler array_of_tables(std::function<void(const toml::table&, const std::string&)> each) {
    return [this, each](const toml::node& n, const std::string& key) {
      const auto* array = n.as_array();
      if (array == nullptr) return fail(n, key, "must be written as [[" + key + "]] tables");
      std::size_t i = 0;
      for (const auto& element : *array) {
        const std::string at = key + "[" + std::to_string(i++) + "]";
        if (const auto* t = element.as_table()) {
          each(*t, at);
        } else {
          fail(element, at, "must be a table");
        }
      }
    };
  }

  Handler sub_table(std::function<void(const toml::table&, const std::string&)> each) {
    return [this, each](const toml::node& n, const std::string& key) {
      const auto* t = n.as_table();
      if (t == nullptr) return fail(n, key, "must be a table ([" + key + "])");
      each(*t, key);
    };
  }

  // Reports required keys that a table lacks.
  void require(const toml::table& tbl, const std::string& prefix,
               std::initializer_list<const char*> keys) {
    for (const char* k : keys) {
      if (!tbl.contains(k)) {
        errors.push_back({tbl.source().begin.line, prefix + "." + k, "is required"});
      }
    }
  }
};


std::optional<std::chrono::milliseconds> milliseconds(Checker& c, const toml::node& n,
                                                      const std::string& key, std::int64_t min,
                                                      std::int64_t max) {
  std::int64_t v = 0;
  const std::size_t before = c.errors.size();
  c.integer_to(v, min, max)(n, key);
  if (c.errors.size() != before) return std::nullopt;
  return std::chrono::milliseconds(v);
}

Handler ms_to(Checker& c, std::chrono::milliseconds& out, std::int64_t min, std::int64_t max) {
  return [&c, &out, min, max](const toml::node& n, const std::string& key) {
    if (auto v = milliseconds(c, n, key, min, max)) out = *v;
  };
}

// "host:port", e.g. "127.0.0.1:5025" or "[::1]:5025".
Handler address_to(Checker& c, drivers::ConnectionOptions& out) {
  return [&c, &out](const toml::node& n, const std::string& key) {
    if (!n.is_string()) return c.fail(n, key, "must be a string \"host:port\"");
    const std::string text = n.as_string()->get();
    const auto colon = text.rfind(':');
    std::string host = colon == std::string::npos ? "" : text.substr(0, colon);
    const std::string port = colon == std::string::npos ? "" : text.substr(colon + 1);
    if (host.size() >= 2 && host.front() == '[' && host.back() == ']') host = host.substr(1, host.size() - 2);
    long value = 0;
    const bool digits = !port.empty() && port.size() <= 5 &&
                        std::all_of(port.begin(), port.end(), [](char ch) { return ch >= '0' && ch <= '9'; });
    if (digits) value = std::stol(port);
    if (host.empty() || !digits || value < 1 || value > 65535) {
      return c.fail(n, key, "must be \"host:port\" with a port 1-65535, not \"" + text + "\"");
    }
    out.host = host;
    out.port = static_cast<std::uint16_t>(value);
  };
}

// One [[source.field]] / [[source.query.field]] table.
drivers::FieldMap parse_field(Checker& c, const toml::table& t, const std::string& p) {
  drivers::FieldMap f;
  std::int64_t index = 0;
  c.table(t, p,
          {{"index", c.integer_to(index, 0, 1000)},
           {"key", c.string_to(f.key)},
           {"quantity", c.string_to(f.quantity)},
           {"scale", [&](const toml::node& n, const std::string& key) {
              if (auto v = c.number(n, key)) f.scale = *v;
            }}});
  f.index = static_cast<std::size_t>(index);
  c.require(t, p, {"quantity"});
  return f;
}

// One [[source]] table, with its optional driver settings.
SourceConfig parse_source(Checker& c, const toml::table& t, const std::string& p) {
  const std::size_t errors_before = c.errors.size();
  SourceConfig s;
  std::string kind, driver;
  drivers::ConnectionOptions connection;
  drivers::OutletOptions outlet;
  drivers::BackoffOptions backoff;
  std::chrono::milliseconds poll_interval{1000}, reply_timeout{1000}, silence_timeout{10000};
  std::optional<std::chrono::milliseconds> stall_after;
  std::string identity_query = "*IDN?", mode = "connect", format = "csv";
  std::vector<drivers::ScpiQuery> queries;
  std::vector<drivers::FieldMap> fields;
  std::int64_t buffer = static_cast<std::int64_t>(outlet.max_buffered_readings);
  std::vector<std::string> driver_keys;  // given, to report them when there is no driver
  auto driver_key = [&](const std::string& name, Handler h) {
    return std::pair<const std::string, Handler>(
        name, [&driver_keys, h, name](const toml::node& n, const std::string& key) {
          driver_keys.push_back(name);
          h(n, key);
        });
  };
  c.table(t, p,
          {{"name", c.string_to(s.name)},
           {"kind", c.string_to(kind, {"lockin", "thermometer", "field"})},
           {"time_future_tolerance_s", c.optional_positive_to(s.time_future_tolerance_s)},
           {"driver", c.string_to(driver, {"scpi-tcp", "line-stream"})},
           driver_key("address", address_to(c, connection)),
           driver_key("terminator", c.string_to(connection.terminator)),
           driver_key("connect_timeout_ms", ms_to(c, connection.connect_timeout, 1, 600000)),
           driver_key("reconnect_min_ms", ms_to(c, backoff.min_delay, 1, 3600000)),
           driver_key("reconnect_max_ms", ms_to(c, backoff.max_delay, 1, 3600000)),
           driver_key("buffer_readings", c.integer_to(buffer, 1, 10000000)),
           driver_key("stall_after_ms", [&](const toml::node& n, const std::string& key) {
             stall_after = milliseconds(c, n, key, 1, 86400000);
           }),
           driver_key("poll_interval_ms", ms_to(c, poll_interval, 1, 86400000)),
           driver_key("reply_timeout_ms", ms_to(c, reply_timeout, 1, 600000)),
           driver_key("identity_query", c.string_to(identity_query)),
           driver_key("query", c.array_of_tables([&](const toml::table& q, const std::string& qp) {
             drivers::ScpiQuery query;
             c.table(q, qp,
                     {{"send", c.string_to(query.send)},
                      {"field", c.array_of_tables([&](const toml::table& f, const std::string& fp) {
                         query.fields.push_back(parse_field(c, f, fp));
                       })}});
             c.require(q, qp, {"send", "field"});
             queries.push_back(std::move(query));
           })),
           driver_key("mode", c.string_to(mode, {"connect", "listen"})),
           driver_key("format", c.string_to(format, {"csv", "json"})),
           driver_key("silence_timeout_ms", ms_to(c, silence_timeout, 1, 86400000)),
           driver_key("field", c.array_of_tables([&](const toml::table& f, const std::string& fp) {
             fields.push_back(parse_field(c, f, fp));
           }))});
  c.require(t, p, {"name", "kind"});
  if (auto k = protocol::parse_kind(kind)) s.kind = *k;
  outlet.max_buffered_readings = static_cast<std::size_t>(buffer);

  // Keys of one driver given for another (or for none) are mistakes, not options.
  static const std::set<std::string> scpi_only = {"poll_interval_ms", "reply_timeout_ms", "identity_query", "query"};
  static const std::set<std::string> stream_only = {"mode", "format", "silence_timeout_ms", "field"};
  const std::size_t line = t.source().begin.line;
  for (const auto& k : driver_keys) {
    if (driver.empty()) {
      c.errors.push_back({line, p + "." + k, "belongs to a driver: set driver = \"scpi-tcp\" or \"line-stream\""});
    } else if (driver == "scpi-tcp" && stream_only.count(k) != 0) {
      c.errors.push_back({line, p + "." + k, "is a line-stream setting, this source's driver is scpi-tcp"});
    } else if (driver == "line-stream" && scpi_only.count(k) != 0) {
      c.errors.push_back({line, p + "." + k, "is a scpi-tcp setting, this source's driver is line-stream"});
    }
  }
  // The driver's own check only makes sense on settings that parsed.
  if (driver.empty() || c.errors.size() != errors_before) return s;
  if (std::find(driver_keys.begin(), driver_keys.end(), "address") == driver_keys.end()) {
    c.errors.push_back({line, p + ".address", "is required with a driver"});
    return s;
  }
  std::string problem;
  if (driver == "scpi-tcp") {
    s.driver = DriverType::scpi_tcp;
    auto& d = s.scpi_tcp;
    d.source = s.name;
    d.kind = s.kind;
    d.connection = connection;
    d.backoff = backoff;
    d.outlet = outlet;
    d.poll_interval = poll_interval;
    d.reply_timeout = reply_timeout;
    if (stall_after) d.stall_after = *stall_after;
    d.identity_query = identity_query;
    d.queries = std::move(queries);
    if (d.queries.empty()) {
      c.errors.push_back({line, p + ".query", "scpi-tcp needs at least one [[" + p.substr(0, p.find('[')) + ".query]]"});
      return s;
    }
    problem = drivers::validate(d);
  } else {
    s.driver = DriverType::line_stream;
    auto& d = s.line_stream;
    d.source = s.name;
    d.kind = s.kind;
    d.connection = connection;
    d.backoff = backoff;
    d.outlet = outlet;
    d.mode = mode == "listen" ? drivers::LineStreamConfig::Mode::listen : drivers::LineStreamConfig::Mode::connect;
    d.format = format == "json" ? drivers::LineStreamConfig::Format::json : drivers::LineStreamConfig::Format::csv;
    d.silence_timeout = silence_timeout;
    if (stall_after) d.stall_after = *stall_after;
    d.fields = std::move(fields);
    problem = drivers::validate(d);
  }
  if (!problem.empty() && !s.name.empty()) c.errors.push_back({line, p, problem});
  return s;
}

}  // namespace

std::string_view driver_type_name(DriverType type) {
  switch (type) {
    case DriverType::scpi_tcp: return "scpi-tcp";
    case DriverType::line_stream: return "line-stream";
    case DriverType::none: break;
  }
  return "none";
}

std::vector<ConfigError> parse_config(std::string_view text, Config& out) {
  Config config;
  Checker c;
  toml::table root;
  try {
    root = toml::parse(text);
  } catch (const toml::parse_error& e) {
    return {{e.source().begin.line, "", std::string(e.description())}};
  }
  std::string synchronous = "normal";
  std::vector<std::size_t> source_lines, sample_lines;
  c.table(root, "",
          {
              {"daemon", c.sub_table([&](const toml::table& t, const std::string& p) {
                 c.table(t, p,
                         {{"log_level", c.string_to(config.log_level,
                                                    {"trace", "debug", "info", "warn", "error"})},
                          {"ingest_endpoint", c.string_to(config.ingest_endpoint)},
                          {"control_endpoint", c.string_to(config.control_endpoint)},
                          {"events_endpoint", c.string_to(config.events_endpoint)}});
               })},
              {"store", c.sub_table([&](const toml::table& t, const std::string& p) {
                 c.table(t, p,
                         {{"synchronous", c.string_to(synchronous, {"normal", "full"})},
                          {"commit_max_readings", c.integer_to(config.commit_max_readings, 1, 10000000)},
                          {"commit_max_ms", c.integer_to(config.commit_max_ms, 1, 60000)},
                          {"queue_max_readings", c.integer_to(config.queue_max_readings, 1, 100000000)},
                          {"checkpoint_interval_ms",
                           c.integer_to(config.checkpoint_interval_ms, 10, 3600000)}});
               })},
              {"ingest", c.sub_table([&](const toml::table& t, const std::string& p) {
                 c.table(t, p,
                         {{"max_frame_bytes", c.size_to(config.limits.max_frame_bytes, 1024, 256 << 20)},
                          {"max_batch_readings", c.size_to(config.limits.max_batch_readings, 1, 1000000)},
                          {"max_name_bytes", c.size_to(config.limits.max_name_bytes, 1, 4096)},
                          {"time_backward_tolerance_s", c.positive_to(config.time_backward_tolerance_s)},
                          {"time_future_tolerance_s", c.positive_to(config.time_future_tolerance_s)}});
               })},
              {"source", c.array_of_tables([&](const toml::table& t, const std::string& p) {
                 config.sources.push_back(parse_source(c, t, p));
                 source_lines.push_back(t.source().begin.line);
               })},
              {"alerts", [&](const toml::node& n, const std::string& key) {
                 if (!n.is_table()) return c.fail(n, key, "must be a table ([alerts])");
                 alerts::parse_alert_config(&n, config.alerts, c.errors);
               }},
              {"sample", c.array_of_tables([&](const toml::table& t, const std::string& p) {
                 SampleConfig s;
                 c.table(t, p,
                         {{"name", c.string_to(s.name)},
                          {"model", c.string_to(s.model, {"hln2d", "hln2d-so", "wire1d", "kawabata3d"})},
                          {"squares", c.positive_to(s.squares)},
                          {"width_m", c.positive_to(s.width_m)},
                          {"thickness_m", c.positive_to(s.thickness_m)},
                          {"excitation_a", c.positive_to(s.excitation_a)},
                          {"lockin", c.string_to(s.lockin)},
                          {"thermometer", c.string_to(s.thermometer)},
                          {"field", c.string_to(s.field)},
                          {"gain", c.optional_positive_to(s.gain)},
                          {"diffusion_m2s", c.optional_positive_to(s.diffusion_m2s)},
                          {"mean_free_path_m", c.optional_positive_to(s.mean_free_path_m)},
                          {"alpha_fixed", c.optional_number_to(s.alpha_fixed)},
                          {"max_age_temperature_s", c.positive_to(s.max_age_temperature_s)},
                          {"max_age_field_s", c.optional_positive_to(s.max_age_field_s)},
                          {"max_hold_s", c.positive_to(s.max_hold_s)},
                          {"sweep_min_span_t", c.optional_positive_to(s.sweep_min_span_t)},
                          {"reversal_tolerance_t", c.optional_positive_to(s.reversal_tolerance_t)},
                          {"sweep_min_points", c.integer_to(s.sweep_min_points, 2, 1000000)},
                          {"field_step_t", c.non_negative_to(s.field_step_t)},
                          {"plateau_relative_spread", c.positive_to(s.plateau_relative_spread)},
                          {"plateau_min_duration_s", c.non_negative_to(s.plateau_min_duration_s)},
                          {"settling_time_constants", c.non_negative_to(s.settling_time_constants)},
                          {"settling_unknown_tau_s", c.non_negative_to(s.settling_unknown_tau_s)},
                          {"combine_up_down", c.bool_to(s.combine_up_down)},
                          {"fit_background", c.bool_to(s.fit_background)},
                          {"probe_length_m", c.optional_positive_to(s.probe_length_m)},
                          {"fit_window_t", c.optional_positive_to(s.fit_window_t)},
                          {"excitation_ratio_max", c.positive_to(s.excitation_ratio_max)},
                          {"quadrature_ratio_max", c.positive_to(s.quadrature_ratio_max)},
                          {"new_cooldown_above_k", c.positive_to(s.new_cooldown_above_k)}});
                 if (s.max_hold_s < std::max(s.max_age_temperature_s,
                                             s.max_age_field_s.value_or(align::AlignerOptions{}.field_age_floor_s))) {
                   c.errors.push_back({t.source().begin.line, p + ".max_hold_s",
                                       "must be at least max_age_temperature_s and max_age_field_s"});
                 }
                 if (s.sweep_min_span_t && s.reversal_tolerance_t &&
                     *s.reversal_tolerance_t >= *s.sweep_min_span_t / 2.0) {
                   c.errors.push_back({t.source().begin.line, p + ".reversal_tolerance_t",
                                       "must be below sweep_min_span_t / 2"});
                 }
                 c.require(t, p,
                           {"name", "model", "squares", "width_m", "thickness_m", "excitation_a",
                            "lockin", "thermometer", "field"});
                 config.samples.push_back(s);
                 sample_lines.push_back(t.source().begin.line);
               })},
          });
  config.synchronous_full = synchronous == "full";

  // Cross-checks: unique, well-formed names; samples refer to sources of the right kind.
  std::set<std::string> seen;
  for (std::size_t i = 0; i < config.sources.size(); ++i) {
    const auto& s = config.sources[i];
    const std::string key = "source[" + std::to_string(i) + "].name";
    if (s.name.empty()) continue;  // reported as required
    if (auto bad = protocol::check_name(s.name, config.limits)) {
      c.errors.push_back({source_lines[i], key, bad->detail});
    } else if (!seen.insert(s.name).second) {
      c.errors.push_back({source_lines[i], key, "source \"" + s.name + "\" is defined twice"});
    }
  }
  std::set<std::string> sample_names;
  for (std::size_t i = 0; i < config.samples.size(); ++i) {
    const auto& s = config.samples[i];
    const std::string p = "sample[" + std::to_string(i) + "]";
    if (!s.name.empty() && !sample_names.insert(s.name).second) {
      c.errors.push_back({sample_lines[i], p + ".name", "sample \"" + s.name + "\" is defined twice"});
    }
    auto check_ref = [&](const std::string& name, protocol::SourceKind kind, const char* key) {
      if (name.empty()) return;
      const SourceConfig* src = config.find_source(name);
      if (src == nullptr) {
        c.errors.push_back({sample_lines[i], p + "." + key, "names no [[source]]: \"" + name + "\""});
      } else if (src->kind != kind) {
        c.errors.push_back({sample_lines[i], p + "." + key,
                            "source \"" + name + "\" is a " + std::string(protocol::kind_name(src->kind)) +
                                ", not a " + std::string(protocol::kind_name(kind))});
      }
    };
    check_ref(s.lockin, protocol::SourceKind::lockin, "lockin");
    check_ref(s.thermometer, protocol::SourceKind::thermometer, "thermometer");
    check_ref(s.field, protocol::SourceKind::field, "field");
  }
  for (const auto& [endpoint, key] :
       {std::pair{&config.ingest_endpoint, "daemon.ingest_endpoint"},
        std::pair{&config.control_endpoint, "daemon.control_endpoint"},
        std::pair{&config.events_endpoint, "daemon.events_endpoint"}}) {
    if (!endpoint->empty() && endpoint->rfind("ipc://", 0) != 0 && endpoint->rfind("tcp://", 0) != 0) {
      c.errors.push_back({0, key, "must start with ipc:// or tcp://"});
    }
  }
  std::stable_sort(c.errors.begin(), c.errors.end(),
                   [](const ConfigError& a, const ConfigError& b) { return a.line < b.line; });
  if (c.errors.empty()) out = std::move(config);
  return c.errors;
}

std::vector<ConfigError> load_config_file(const std::string& path, Config& out) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return {{0, "", "cannot read the file"}};
  std::ostringstream text;
  text << in.rdbuf();
  if (in.bad()) return {{0, "", "cannot read the file"}};
  return parse_config(text.str(), out);
}

std::string format_error(std::string_view file, const ConfigError& e) {
  std::ostringstream s;
  s << file;
  if (e.line != 0) s << ':' << e.line;
  s << ": ";
  if (!e.key.empty()) s << e.key << ": ";
  s << e.message;
  return s.str();
}

}  // namespace lphi::config
