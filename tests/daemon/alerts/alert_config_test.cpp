// The [alerts] table: defaults, the example, and errors that name the key
// and the line. Line numbers are those of the TOML text below (TOML v1.0:
// lines count from 1; toml++ reports the line of a value's first character).
#include <gtest/gtest.h>

#include <toml++/toml.h>

#include "daemon/alerts/alert_config.hpp"

namespace lphi::alerts {
namespace {

struct Parsed {
  AlertConfig config;
  std::vector<config::ConfigError> errors;
};

Parsed parse(std::string_view text) {
  Parsed out;
  try {
    // toml++ as Debian builds it reports a syntax error by throwing.
    const toml::table doc = toml::parse(text);
    parse_alert_config(doc.get("alerts"), out.config, out.errors);
  } catch (const toml::parse_error& e) {
    ADD_FAILURE() << "not TOML: " << e.description();
  }
  return out;
}

// Every field of two configs, rule by rule.
template <class Rule>
void expect_common(const Rule& a, const Rule& b, const char* name) {
  EXPECT_EQ(a.enabled, b.enabled) << name;
  EXPECT_EQ(a.severity, b.severity) << name;
  EXPECT_EQ(a.clear_after, b.clear_after) << name;
}

void expect_same(const AlertConfig& a, const AlertConfig& b) {
  expect_common(a.lphi_range, b.lphi_range, "lphi-range");
  EXPECT_EQ(a.lphi_range.min_m, b.lphi_range.min_m);
  EXPECT_EQ(a.lphi_range.max_m, b.lphi_range.max_m);
  EXPECT_EQ(a.lphi_range.hysteresis, b.lphi_range.hysteresis);
  expect_common(a.fit_failed, b.fit_failed, "fit-failed");
  expect_common(a.fit_chi2, b.fit_chi2, "fit-chi2");
  EXPECT_EQ(a.fit_chi2.max_chi2_red, b.fit_chi2.max_chi2_red);
  EXPECT_EQ(a.fit_chi2.hysteresis, b.fit_chi2.hysteresis);
  expect_common(a.field_offset, b.field_offset, "field-offset");
  EXPECT_EQ(a.field_offset.max_fraction, b.field_offset.max_fraction);
  EXPECT_EQ(a.field_offset.hysteresis, b.field_offset.hysteresis);
  expect_common(a.verdict_saturating, b.verdict_saturating, "verdict-saturating");
  expect_common(a.verdict_saturated, b.verdict_saturated, "verdict-saturated");
  expect_common(a.electrons_not_cooling, b.electrons_not_cooling, "electrons-not-cooling");
  expect_common(a.temperature_unstable, b.temperature_unstable, "temperature-unstable");
  expect_common(a.lockin_overload, b.lockin_overload, "lockin-overload");
  EXPECT_EQ(a.lockin_overload.max_points, b.lockin_overload.max_points);
  expect_common(a.quadrature, b.quadrature, "quadrature");
  EXPECT_EQ(a.quadrature.max_ratio, b.quadrature.max_ratio);
  EXPECT_EQ(a.quadrature.hysteresis, b.quadrature.hysteresis);
  expect_common(a.excitation_heating, b.excitation_heating, "excitation-heating");
  EXPECT_EQ(a.excitation_heating.max_ratio, b.excitation_heating.max_ratio);
  EXPECT_EQ(a.excitation_heating.hysteresis, b.excitation_heating.hysteresis);
  expect_common(a.source_silent, b.source_silent, "source-silent");
  EXPECT_EQ(a.source_silent.silent_s, b.source_silent.silent_s);
  expect_common(a.gap, b.gap, "gap");
  EXPECT_EQ(a.gap.quiet_s, b.gap.quiet_s);
  expect_common(a.disk_space, b.disk_space, "disk-space");
  EXPECT_EQ(a.disk_space.min_free_bytes, b.disk_space.min_free_bytes);
  EXPECT_EQ(a.disk_space.hysteresis, b.disk_space.hysteresis);
  expect_common(a.writer_lag, b.writer_lag, "writer-lag");
  EXPECT_EQ(a.writer_lag.max_lag_s, b.writer_lag.max_lag_s);
  EXPECT_EQ(a.writer_lag.hysteresis, b.writer_lag.hysteresis);
  EXPECT_EQ(a.hook_command, b.hook_command);
  EXPECT_EQ(a.hook_timeout_s, b.hook_timeout_s);
  EXPECT_EQ(a.hook_max_per_minute, b.hook_max_per_minute);
  EXPECT_EQ(a.hook_queue, b.hook_queue);
}

TEST(AlertConfig, MissingTableGivesTheDefaults) {
  AlertConfig out;
  out.fit_chi2.max_chi2_red = 99.0;  // must be reset
  std::vector<config::ConfigError> errors;
  parse_alert_config(nullptr, out, errors);
  EXPECT_TRUE(errors.empty());
  expect_same(out, AlertConfig{});
}

TEST(AlertConfig, ExampleParsesAsPrintedAndHoldsEveryDefault) {
  const Parsed p = parse(example_alert_config());
  for (const auto& e : p.errors) ADD_FAILURE() << e.line << ": " << e.key << ": " << e.message;
  expect_same(p.config, AlertConfig{});
  // Every rule has its table in the example.
  const toml::table doc = toml::parse(example_alert_config());
  for (std::string_view rule : rule_names) {
    EXPECT_NE(doc["alerts"][rule].as_table(), nullptr) << rule;
  }
}

// The defaults of the value rules agree with the live checks of
// analysis/live_checks.hpp, which take them from common practice:
// chi2_red 3, |Y/X| 0.1, e V / k_B T 1 (analysis/PHYSICS.md, "Electron
// heating").
TEST(AlertConfig, DefaultsFollowTheLiveChecks) {
  const AlertConfig c;
  EXPECT_EQ(c.fit_chi2.max_chi2_red, 3.0);
  EXPECT_EQ(c.quadrature.max_ratio, 0.1);
  EXPECT_EQ(c.excitation_heating.max_ratio, 1.0);
  EXPECT_EQ(c.verdict_saturating.severity, Severity::info);
  EXPECT_EQ(c.electrons_not_cooling.severity, Severity::critical);
}

TEST(AlertConfig, ValuesAreRead) {
  const Parsed p = parse(R"([alerts]
hook_command = ["/usr/bin/env", "notify", "--room=fridge"]
hook_timeout_s = 3
[alerts.fit-chi2]
max_chi2_red = 5.5
severity = "critical"
clear_after = 4
[alerts.source-silent]
enabled = false
)");
  ASSERT_TRUE(p.errors.empty()) << p.errors.front().key << ": " << p.errors.front().message;
  EXPECT_EQ(p.config.hook_command, (std::vector<std::string>{"/usr/bin/env", "notify", "--room=fridge"}));
  EXPECT_EQ(p.config.hook_timeout_s, 3.0);  // an integer is a number too
  EXPECT_EQ(p.config.fit_chi2.max_chi2_red, 5.5);
  EXPECT_EQ(p.config.fit_chi2.severity, Severity::critical);
  EXPECT_EQ(p.config.fit_chi2.clear_after, 4);
  EXPECT_FALSE(p.config.source_silent.enabled);
  EXPECT_TRUE(p.config.writer_lag.enabled);  // untouched rules keep their defaults
}

struct Expected {
  std::size_t line;
  std::string key;
  std::string words;  // part of the message
};

void expect_errors(std::string_view text, const std::vector<Expected>& expected) {
  const Parsed p = parse(text);
  ASSERT_EQ(p.errors.size(), expected.size()) << text;
  for (std::size_t i = 0; i < expected.size(); ++i) {
    EXPECT_EQ(p.errors[i].line, expected[i].line) << p.errors[i].key;
    EXPECT_EQ(p.errors[i].key, expected[i].key);
    EXPECT_NE(p.errors[i].message.find(expected[i].words), std::string::npos) << p.errors[i].message;
  }
}

TEST(AlertConfig, ErrorsNameTheKeyAndTheLine) {
  expect_errors("[alerts]\n"
                "hook_timeout_s = -1\n"
                "[alerts.fit-chi2]\n"
                "max_chi2 = 4.0\n",
                {{2, "alerts.hook_timeout_s", "above 0"}, {4, "alerts.fit-chi2.max_chi2", "unknown key"}});
  expect_errors("[alerts.quadrature]\n"
                "\n"
                "hysteresis = 1.5\n"
                "severity = \"loud\"\n"
                "clear_after = 0\n",
                {{3, "alerts.quadrature.hysteresis", "at most 0.99"},
                 {4, "alerts.quadrature.severity", "\"loud\""},
                 {5, "alerts.quadrature.clear_after", "between 1"}});
  expect_errors("[alerts]\nhook_command = \"mail -s alert\"\n",
                {{2, "alerts.hook_command", "array of strings"}});
  expect_errors("[alerts]\nhook_command = [\"/bin/true\", 3]\n",
                {{2, "alerts.hook_command", "strings only"}});
  expect_errors("[alerts.no-such-rule]\nenabled = true\n", {{1, "alerts.no-such-rule", "unknown key"}});
  expect_errors("[alerts]\nfit-failed = 3\n", {{2, "alerts.fit-failed", "must be a table"}});
  expect_errors("[alerts.lockin-overload]\nenabled = \"yes\"\nmax_points = 1.5\n",
                {{2, "alerts.lockin-overload.enabled", "true or false"},
                 {3, "alerts.lockin-overload.max_points", "integer"}});
  expect_errors("[alerts.writer-lag]\nmax_lag_s = nan\n",
                {{2, "alerts.writer-lag.max_lag_s", "finite"}});
}

TEST(AlertConfig, RangeMustBeOrdered) {
  expect_errors("[alerts.lphi-range]\nmin_m = 1e-5\nmax_m = 1e-6\n",
                {{1, "alerts.lphi-range.max_m", "above min_m"}});
}

TEST(AlertConfig, AlertsMustBeATable) {
  expect_errors("alerts = 3\n", {{1, "alerts", "must be a table"}});
}

}  // namespace
}  // namespace lphi::alerts
