// The alert rules: what each fact from the analysis or lphid's health means
// for each configured rule.
//
// Each judge_* turns one fact into one Observation per rule (bad, good,
// inside the hysteresis band, or nothing to judge), with the value, the
// message and the context an alert would carry, and hands them to `evaluate`
// in a fixed order. The rules decide nothing about the alerts' lifecycle:
// raising, updating and clearing are the engine's (alert_engine.hpp). A rule
// that is disabled is still judged; the engine skips it.
//
// Thread safety: judge_fit, judge_sweep and judge_verdict hold no state and
// may be called from any thread. A HealthRules is used by one thread at a
// time (the engine calls it under its lock).
#pragma once

#include <cstdint>
#include <functional>
#include <map>
#include <optional>
#include <string>
#include <string_view>

#include <nlohmann/json.hpp>

#include "daemon/alerts/alert_config.hpp"
#include "daemon/alerts/alert_engine.hpp"
#include "daemon/alerts/severity.hpp"

namespace lphi::alerts {

enum class Judgement {
  bad,   // the condition holds: raise, or update the live alert
  good,  // clearly fine: counts toward clear_after
  band,  // inside the limit but not by the hysteresis margin: the good run restarts
  none,  // nothing to judge (e.g. no L_phi from a failed fit)
};

struct Observation {
  Judgement judgement = Judgement::none;
  std::optional<double> value;
  std::string message;  // for bad
  nlohmann::json context = nlohmann::json::object();
};

// A rule's configured settings that the lifecycle needs.
struct RuleSettings {
  bool enabled;
  Severity severity;
  std::int64_t clear_after;
};

// Receives one observation: the rule's name, the subject (sample or source,
// "" for lphid itself), the rule's settings, the observation, its time
// (event time from the analysis, wall time from the health timer), and
// whether it is a health observation (judged once a second, so a re-trigger
// is stored at most every minute).
using ObservationSink = std::function<void(std::string_view rule, const std::string& subject,
                                           const RuleSettings& settings, Observation observation,
                                           double t, bool health)>;

// JSON for an optional value: null when absent or not finite.
nlohmann::json optional_json(const std::optional<double>& v);

// fit-failed, fit-chi2, field-offset (only when the fit has a B_phi and a
// field offset), lphi-range.
void judge_fit(const AlertConfig& config, const FitFact& fact, const ObservationSink& evaluate);
// temperature-unstable, lockin-overload, quadrature, excitation-heating.
void judge_sweep(const AlertConfig& config, const SweepFact& fact, const ObservationSink& evaluate);
// verdict-saturating, verdict-saturated, electrons-not-cooling.
void judge_verdict(const AlertConfig& config, const VerdictFact& fact, const ObservationSink& evaluate);

// source-silent, gap (per source), disk-space, writer-lag. Remembers, per
// source, when it was first seen and its gap count, so that only new gaps
// raise and a gap alert clears after gap.quiet_s without one.
class HealthRules {
 public:
  // Whether the gap alert of a source is live (not cleared).
  using GapLive = std::function<bool(const std::string& source)>;

  void judge(const AlertConfig& config, const HealthFact& fact, const GapLive& gap_live,
             const ObservationSink& evaluate);

 private:
  struct SourceTrack {
    double first_seen = 0.0;
    std::uint64_t gaps = 0;
    std::optional<double> last_new_gap;
  };
  std::map<std::string, SourceTrack> sources_;
};

}  // namespace lphi::alerts
