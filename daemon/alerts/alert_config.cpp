#include "daemon/alerts/alert_config.hpp"

#include <algorithm>
#include <cmath>
#include <functional>
#include <fmt/format.h>
#include <map>

namespace lphi::alerts {

namespace {

using Handler = text::TomlKeys::Handler;
using Handlers = text::TomlKeys::Handlers;

// The [alerts] keys, checked by lphi's one TOML key checker.
class Parser : public text::TomlKeys {
 public:
  explicit Parser(std::vector<config::ConfigError>& errors) : text::TomlKeys(errors) {}

  void table(const toml::table& tbl, const std::string& prefix, const Handlers& handlers) {
    visit(tbl, prefix, handlers);
  }

  Handler boolean(bool& out) {
    return [this, &out](const toml::node& n, const std::string& key) {
      if (auto v = TomlKeys::boolean(n, key)) out = *v;
    };
  }

  Handler severity(Severity& out) {
    return [this, &out](const toml::node& n, const std::string& key) {
      if (!n.is_string()) return fail(n, key, "must be a string: \"info\", \"warning\" or \"critical\"");
      const auto parsed = parse_severity(n.as_string()->get());
      if (!parsed) {
        return fail(n, key, "must be \"info\", \"warning\" or \"critical\", not \"" +
                                n.as_string()->get() + "\"");
      }
      out = *parsed;
    };
  }

  Handler integer(std::int64_t& out, std::int64_t min, std::int64_t max) {
    return [this, &out, min, max](const toml::node& n, const std::string& key) {
      const auto value = TomlKeys::integer(n, key);
      if (!value) return;
      const std::int64_t v = *value;
      if (v < min || v > max) {
        return fail(n, key, "must lie between " + std::to_string(min) + " and " + std::to_string(max) +
                                ", not " + std::to_string(v));
      }
      out = v;
    };
  }

  // A number (integer or floating point) in [min, max], or in (min, max]
  // when min_open.
  Handler number(double& out, double min, double max, bool min_open) {
    return [this, &out, min, max, min_open](const toml::node& n, const std::string& key) {
      const auto value = TomlKeys::number(n, key);
      if (!value) return;
      const double v = *value;
      const bool below = min_open ? !(v > min) : v < min;
      if (below || v > max) {
        std::string range = min_open ? "above " + format(min) : "at least " + format(min);
        range += " and at most " + format(max);
        return fail(n, key, "must be " + range + ", not " + format(v));
      }
      out = v;
    };
  }

  Handler positive(double& out) { return number(out, 0.0, 1e300, true); }
  Handler fraction(double& out) { return number(out, 0.0, 0.99, false); }

  Handler argv(std::vector<std::string>& out) {
    return [this, &out](const toml::node& n, const std::string& key) {
      const toml::array* array = n.as_array();
      if (array == nullptr) return fail(n, key, "must be an array of strings: program, then its arguments");
      std::vector<std::string> words;
      for (const toml::node& item : *array) {
        if (!item.is_string()) return fail(item, key, "must hold strings only");
        words.push_back(item.as_string()->get());
      }
      if (!words.empty() && words.front().empty()) return fail(n, key, "names an empty program");
      for (const auto& w : words) {
        if (w.find('\0') != std::string::npos) return fail(n, key, "holds a NUL character");
      }
      out = std::move(words);
    };
  }

  // A [alerts.<rule>] sub-table.
  template <class Rule>
  Handler rule(Rule& r, Handlers extra) {
    return [this, &r, extra = std::move(extra)](const toml::node& n, const std::string& key) mutable {
      const toml::table* tbl = TomlKeys::table(n, key);
      if (tbl == nullptr) return;
      Handlers handlers = extra;
      handlers["enabled"] = boolean(r.enabled);
      handlers["severity"] = severity(r.severity);
      handlers["clear_after"] = integer(r.clear_after, 1, 1000000);
      table(*tbl, key, handlers);
    };
  }

  static std::string format(double v) { return fmt::format("{:g}", v); }
};

}  // namespace

void parse_alert_config(const toml::node* alerts_table, AlertConfig& out,
                        std::vector<config::ConfigError>& errors) {
  out = AlertConfig{};
  if (alerts_table == nullptr) return;
  Parser p(errors);
  const toml::table* tbl = alerts_table->as_table();
  if (tbl == nullptr) {
    p.fail(*alerts_table, "alerts", "must be a table");
    return;
  }
  const std::size_t errors_before = errors.size();
  AlertConfig& c = out;
  Handlers handlers = {
      {"hook_command", p.argv(c.hook_command)},
      {"hook_timeout_s", p.number(c.hook_timeout_s, 0.0, 86400.0, true)},
      {"hook_max_per_minute", p.integer(c.hook_max_per_minute, 1, 100000)},
      {"hook_queue", p.integer(c.hook_queue, 1, 100000)},
      {"lphi-range", p.rule(c.lphi_range, {{"min_m", p.positive(c.lphi_range.min_m)},
                                           {"max_m", p.positive(c.lphi_range.max_m)},
                                           {"hysteresis", p.fraction(c.lphi_range.hysteresis)}})},
      {"fit-failed", p.rule(c.fit_failed, {})},
      {"fit-chi2", p.rule(c.fit_chi2, {{"max_chi2_red", p.positive(c.fit_chi2.max_chi2_red)},
                                       {"hysteresis", p.fraction(c.fit_chi2.hysteresis)}})},
      {"field-offset", p.rule(c.field_offset, {{"max_fraction", p.positive(c.field_offset.max_fraction)},
                                               {"hysteresis", p.fraction(c.field_offset.hysteresis)}})},
      {"verdict-saturating", p.rule(c.verdict_saturating, {})},
      {"verdict-saturated", p.rule(c.verdict_saturated, {})},
      {"electrons-not-cooling", p.rule(c.electrons_not_cooling, {})},
      {"temperature-unstable", p.rule(c.temperature_unstable, {})},
      {"lockin-overload",
       p.rule(c.lockin_overload, {{"max_points", p.integer(c.lockin_overload.max_points, 0, 1000000000)}})},
      {"quadrature", p.rule(c.quadrature, {{"max_ratio", p.positive(c.quadrature.max_ratio)},
                                           {"hysteresis", p.fraction(c.quadrature.hysteresis)}})},
      {"excitation-heating",
       p.rule(c.excitation_heating, {{"max_ratio", p.positive(c.excitation_heating.max_ratio)},
                                     {"hysteresis", p.fraction(c.excitation_heating.hysteresis)}})},
      {"source-silent", p.rule(c.source_silent, {{"silent_s", p.positive(c.source_silent.silent_s)}})},
      {"gap", p.rule(c.gap, {{"quiet_s", p.number(c.gap.quiet_s, 0.0, 1e9, false)}})},
      {"disk-space", p.rule(c.disk_space, {{"min_free_bytes", p.positive(c.disk_space.min_free_bytes)},
                                           {"hysteresis", p.fraction(c.disk_space.hysteresis)}})},
      {"writer-lag", p.rule(c.writer_lag, {{"max_lag_s", p.positive(c.writer_lag.max_lag_s)},
                                           {"hysteresis", p.fraction(c.writer_lag.hysteresis)}})},
  };
  p.table(*tbl, "alerts", handlers);
  // toml++ visits keys in sorted order; people read errors in file order.
  std::stable_sort(errors.begin() + static_cast<std::ptrdiff_t>(errors_before), errors.end(),
                   [](const config::ConfigError& a, const config::ConfigError& b) { return a.line < b.line; });
  if (errors.size() == errors_before && !(c.lphi_range.min_m < c.lphi_range.max_m)) {
    const toml::node* range = tbl->get("lphi-range");
    p.fail(range != nullptr ? *range : *alerts_table, "alerts.lphi-range.max_m",
           "must be above min_m (" + Parser::format(c.lphi_range.min_m) + " m)");
  }
}

}  // namespace lphi::alerts
