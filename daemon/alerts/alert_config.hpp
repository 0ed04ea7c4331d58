// The [alerts] table of lphid's config: one sub-table per rule, plus the
// command hook.
//
// Every rule has `enabled`, a `severity` (info | warning | critical) and a
// `clear_after`: how many consecutive good observations (fits, sweeps,
// verdicts or health ticks, whichever the rule watches) clear a live alert.
// A rule that compares a value with a limit also has a `hysteresis`, a
// fraction of the limit: the value must be back inside by that margin to
// count as good (chi2_red below max * (1 - hysteresis), L_phi above
// min * (1 + hysteresis), ...), so that a value flapping around the limit
// raises one alert, not one per crossing.
//
// The defaults follow the live checks of analysis/live_checks.hpp where
// those have one (chi2_red 3, |Y/X| 0.1, e V / k_B T 1; common practice).
#pragma once

#include <cstddef>
#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include <toml++/toml.h>

#include "daemon/alerts/severity.hpp"
#include "daemon/config/config.hpp"

namespace lphi::alerts {

// Rules on sweep fits, sweeps and verdicts have the sample as subject.
// "lphi-range": a fitted L_phi outside [min_m, max_m].
struct LphiRangeRule {
  bool enabled = true;
  Severity severity = Severity::warning;
  std::int64_t clear_after = 2;
  double min_m = 10e-9;
  double max_m = 100e-6;
  double hysteresis = 0.1;
};

// "fit-failed": the fit failed or did not converge.
struct FitFailedRule {
  bool enabled = true;
  Severity severity = Severity::warning;
  std::int64_t clear_after = 2;
};

// "fit-chi2": chi2_red above max_chi2_red.
struct FitChi2Rule {
  bool enabled = true;
  Severity severity = Severity::warning;
  std::int64_t clear_after = 2;
  double max_chi2_red = 3.0;
  double hysteresis = 0.2;
};

// "field-offset": the field axis of a fit is off by a sizeable fraction of
// B_phi: the larger of |field offset| (the field reading at which the sweep's
// cusp lies: a remanent field in the magnet, or a lag when the sweep is one
// leg) and |lag field| (half the difference of the up and down legs'
// offsets) over B_phi is above max_fraction. The sweep is centred before it
// is fitted, so L_phi is corrected; the alert says that the magnet or the
// sweep rate needs attention.
struct FieldOffsetRule {
  bool enabled = true;
  Severity severity = Severity::warning;
  std::int64_t clear_after = 2;
  double max_fraction = 0.2;
  double hysteresis = 0.2;
};

// "verdict-saturating": the verdict enters "saturating".
struct VerdictSaturatingRule {
  bool enabled = true;
  Severity severity = Severity::info;
  std::int64_t clear_after = 2;
};

// "verdict-saturated": the verdict enters "saturated".
struct VerdictSaturatedRule {
  bool enabled = true;
  Severity severity = Severity::warning;
  std::int64_t clear_after = 2;
};

// "electrons-not-cooling": the verdict says electrons_cooling = false.
struct ElectronsNotCoolingRule {
  bool enabled = true;
  Severity severity = Severity::critical;
  std::int64_t clear_after = 2;
};

// "temperature-unstable": a sweep straddled a temperature change.
struct TemperatureUnstableRule {
  bool enabled = true;
  Severity severity = Severity::info;
  std::int64_t clear_after = 2;
};

// "lockin-overload": a sweep with more than max_points overloaded points.
struct LockinOverloadRule {
  bool enabled = true;
  Severity severity = Severity::warning;
  std::int64_t clear_after = 2;
  std::int64_t max_points = 0;
};

// "quadrature": max |Y/X| over a sweep above max_ratio.
struct QuadratureRule {
  bool enabled = true;
  Severity severity = Severity::warning;
  std::int64_t clear_after = 2;
  double max_ratio = 0.1;
  double hysteresis = 0.2;
};

// "excitation-heating": e V / k_B T at the sweep's temperature above max_ratio.
struct ExcitationHeatingRule {
  bool enabled = true;
  Severity severity = Severity::warning;
  std::int64_t clear_after = 2;
  double max_ratio = 1.0;
  double hysteresis = 0.1;
};

// "source-silent": no reading arrived for silent_s (wall clock; subject: the source).
struct SourceSilentRule {
  bool enabled = true;
  Severity severity = Severity::critical;
  std::int64_t clear_after = 1;
  double silent_s = 120.0;
};

// "gap": new gaps recorded for a source (subject: the source).
struct GapRule {
  bool enabled = true;
  Severity severity = Severity::warning;
  std::int64_t clear_after = 1;
  double quiet_s = 600.0;  // clear_after counts health ticks at least quiet_s after the last new gap
};

// "disk-space": free bytes on the data directory's file system below min_free_bytes.
struct DiskSpaceRule {
  bool enabled = true;
  Severity severity = Severity::critical;
  std::int64_t clear_after = 1;
  double min_free_bytes = 2e9;
  double hysteresis = 0.1;
};

// "writer-lag": the store writer behind by more than max_lag_s.
struct WriterLagRule {
  bool enabled = true;
  Severity severity = Severity::warning;
  std::int64_t clear_after = 3;
  double max_lag_s = 10.0;
  double hysteresis = 0.5;
};

struct AlertConfig {
  LphiRangeRule lphi_range;
  FitFailedRule fit_failed;
  FitChi2Rule fit_chi2;
  FieldOffsetRule field_offset;
  VerdictSaturatingRule verdict_saturating;
  VerdictSaturatedRule verdict_saturated;
  ElectronsNotCoolingRule electrons_not_cooling;
  TemperatureUnstableRule temperature_unstable;
  LockinOverloadRule lockin_overload;
  QuadratureRule quadrature;
  ExcitationHeatingRule excitation_heating;
  SourceSilentRule source_silent;
  GapRule gap;
  DiskSpaceRule disk_space;
  WriterLagRule writer_lag;

  // The command hook: argv (no shell), run once per alert change with the
  // alert's JSON on stdin. Empty: no hook.
  std::vector<std::string> hook_command;
  double hook_timeout_s = 10.0;          // then SIGTERM, 2 s later SIGKILL
  std::int64_t hook_max_per_minute = 10; // more in any 60 s are dropped and counted
  std::int64_t hook_queue = 64;          // alert changes waiting for the hook; more are dropped
};

// The names of the rules, as in the config's sub-tables and in Alert::rule.
inline constexpr std::string_view rule_names[] = {
    "lphi-range",       "fit-failed",          "fit-chi2",
    "verdict-saturating", "verdict-saturated", "electrons-not-cooling",
    "temperature-unstable", "source-silent",   "lockin-overload",
    "quadrature",       "excitation-heating",  "gap",
    "disk-space",       "writer-lag",          "field-offset"};

// Fills `out` from the [alerts] table (nullptr: no table, the defaults).
// Unknown keys, wrong types and values out of range are appended to
// `errors`, each naming the dotted key ("alerts.fit-chi2.max_chi2_red") and
// its line. `out` is only meaningful when no error was appended.
void parse_alert_config(const toml::node* alerts_table, AlertConfig& out,
                        std::vector<config::ConfigError>& errors);

// The commented [alerts] table with every key at its default; it parses as
// printed (to append to the example config).
std::string_view example_alert_config();

}  // namespace lphi::alerts
