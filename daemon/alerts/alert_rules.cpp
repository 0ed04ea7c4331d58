// The alert rules (alert_rules.hpp): one observation per rule from each fact.
#include "daemon/alerts/alert_rules.hpp"

#include <algorithm>
#include <cmath>
#include <utility>

#include <spdlog/fmt/fmt.h>

namespace lphi::alerts {

using nlohmann::json;

namespace {

// A finite value or none (JSON and the value column hold no infinity).
std::optional<double> finite(double v) {
  if (std::isfinite(v)) return v;
  return std::nullopt;
}

// The common judgement of a value against an upper limit with hysteresis.
Judgement above_limit(double value, double limit, double hysteresis) {
  if (!(value <= limit)) return Judgement::bad;  // NaN and +inf are bad too
  if (value < limit * (1.0 - hysteresis)) return Judgement::good;
  return Judgement::band;
}

// ... and against a lower limit.
Judgement below_limit(double value, double limit, double hysteresis) {
  if (!(value >= limit)) return Judgement::bad;
  if (value > limit * (1.0 + hysteresis)) return Judgement::good;
  return Judgement::band;
}

template <class Rule>
RuleSettings settings(const Rule& r) {
  return {r.enabled, r.severity, r.clear_after};
}

// The fit's advice, as a sentence to append to a message ("" when none).
std::string with_advice(const std::string& advice) {
  return advice.empty() ? std::string() : "; advice: " + advice;
}

std::string format_bytes(double bytes) {
  if (bytes >= 1e9) return fmt::format("{:.2f} GB", bytes / 1e9);
  if (bytes >= 1e6) return fmt::format("{:.1f} MB", bytes / 1e6);
  return fmt::format("{:.0f} bytes", bytes);
}

}  // namespace

json optional_json(const std::optional<double>& v) {
  return v && std::isfinite(*v) ? json(*v) : json(nullptr);
}

void judge_fit(const AlertConfig& c, const FitFact& f, const ObservationSink& evaluate) {
  const json base = {{"sweep_id", f.sweep_id},
                     {"sweep_index", f.sweep_index},
                     {"t", f.t},
                     {"temperature_k", f.temperature_k}};

  Observation failed;
  failed.context = base;
  if (!f.ok || !f.converged) {
    failed.judgement = Judgement::bad;
    failed.context["error"] = f.error;
    failed.context["converged"] = f.converged;
    failed.message = !f.ok ? fmt::format("sample {}: the fit of sweep {} failed: {}", f.sample,
                                         f.sweep_index, f.error.empty() ? "no reason given" : f.error)
                           : fmt::format("sample {}: the fit of sweep {} did not converge", f.sample,
                                         f.sweep_index);
  } else {
    failed.judgement = Judgement::good;
  }
  evaluate("fit-failed", f.sample, settings(c.fit_failed), std::move(failed), f.t, false);
  if (!f.ok) return;  // no chi-square, no L_phi to judge

  Observation chi2;
  chi2.value = finite(f.chi2_red);
  chi2.context = base;
  chi2.context["chi2_red"] = optional_json(chi2.value);
  chi2.context["max_chi2_red"] = c.fit_chi2.max_chi2_red;
  chi2.judgement = above_limit(f.chi2_red, c.fit_chi2.max_chi2_red, c.fit_chi2.hysteresis);
  chi2.message = fmt::format("sample {}: chi2_red = {:.3g} for sweep {} is above {:g}{}", f.sample,
                             f.chi2_red, f.sweep_index, c.fit_chi2.max_chi2_red,
                             with_advice(f.advice));
  evaluate("fit-chi2", f.sample, settings(c.fit_chi2), std::move(chi2), f.t, false);

  // field-offset: judged only when the fit has a B_phi and the sweep could be
  // centred; the value is the larger of |offset| and |lag field| over B_phi.
  if (f.b_phi_t && *f.b_phi_t > 0.0 && std::isfinite(*f.b_phi_t) && f.field_offset_t) {
    Observation offset;
    const double off = std::abs(*f.field_offset_t);
    const double lag = f.lag_field_t ? std::abs(*f.lag_field_t) : 0.0;
    const double fraction = std::max(off, lag) / *f.b_phi_t;
    offset.value = finite(fraction);
    offset.context = base;
    offset.context["field_offset_t"] = optional_json(f.field_offset_t);
    offset.context["lag_field_t"] = optional_json(f.lag_field_t);
    offset.context["b_phi_t"] = *f.b_phi_t;
    offset.context["fraction_of_b_phi"] = optional_json(offset.value);
    offset.context["max_fraction"] = c.field_offset.max_fraction;
    offset.context["advice"] = f.advice;
    offset.judgement = above_limit(fraction, c.field_offset.max_fraction, c.field_offset.hysteresis);
    offset.message = fmt::format(
        "sample {}: sweep {} has a field offset of {:.3g} mT{} against B_phi = {:.3g} mT "
        "({:.2g} of B_phi, limit {:g}); it was centred before the fit{}",
        f.sample, f.sweep_index, *f.field_offset_t * 1e3,
        f.lag_field_t ? fmt::format(" and a lag field of {:.3g} mT", *f.lag_field_t * 1e3) : "",
        *f.b_phi_t * 1e3, fraction, c.field_offset.max_fraction, with_advice(f.advice));
    evaluate("field-offset", f.sample, settings(c.field_offset), std::move(offset), f.t, false);
  }

  Observation range;
  range.value = finite(f.lphi_m);
  range.context = base;
  range.context["lphi_m"] = optional_json(range.value);
  range.context["lphi_err_m"] = optional_json(finite(f.lphi_err_m));
  range.context["min_m"] = c.lphi_range.min_m;
  range.context["max_m"] = c.lphi_range.max_m;
  const Judgement low = below_limit(f.lphi_m, c.lphi_range.min_m, c.lphi_range.hysteresis);
  const Judgement high = above_limit(f.lphi_m, c.lphi_range.max_m, c.lphi_range.hysteresis);
  range.judgement = (low == Judgement::bad || high == Judgement::bad)     ? Judgement::bad
                    : (low == Judgement::good && high == Judgement::good) ? Judgement::good
                                                                          : Judgement::band;
  range.message = fmt::format("sample {}: L_phi = {:.3g} m from sweep {} is outside [{:g}, {:g}] m",
                              f.sample, f.lphi_m, f.sweep_index, c.lphi_range.min_m, c.lphi_range.max_m);
  evaluate("lphi-range", f.sample, settings(c.lphi_range), std::move(range), f.t, false);
}

void judge_sweep(const AlertConfig& c, const SweepFact& f, const ObservationSink& evaluate) {
  const json base = {{"sweep_id", f.sweep_id},
                     {"sweep_index", f.sweep_index},
                     {"t", f.t},
                     {"temperature_k", f.temperature_k},
                     {"n_points", f.n_points}};

  Observation unstable;
  unstable.context = base;
  unstable.context["temperature_spread_k"] = f.temperature_spread_k;
  unstable.value = finite(f.temperature_spread_k);
  unstable.judgement = f.temperature_unstable ? Judgement::bad : Judgement::good;
  unstable.message = fmt::format(
      "sample {}: the temperature changed during sweep {} (spread {:.3g} K around {:.4g} K); "
      "its fit enters L_phi(T) only if the change moves L_phi by less than its error",
      f.sample, f.sweep_index, f.temperature_spread_k, f.temperature_k);
  evaluate("temperature-unstable", f.sample, settings(c.temperature_unstable), std::move(unstable),
           f.t, false);

  Observation overload;
  overload.context = base;
  overload.context["n_overload"] = f.n_overload;
  overload.value = static_cast<double>(f.n_overload);
  overload.judgement = static_cast<std::int64_t>(f.n_overload) > c.lockin_overload.max_points
                           ? Judgement::bad
                           : Judgement::good;
  overload.message = fmt::format("sample {}: {} of the {} points of sweep {} overloaded the lock-in",
                                 f.sample, f.n_overload, f.n_points, f.sweep_index);
  evaluate("lockin-overload", f.sample, settings(c.lockin_overload), std::move(overload), f.t, false);

  Observation quadrature;
  quadrature.context = base;
  quadrature.value = finite(f.max_quadrature_ratio);
  quadrature.context["max_quadrature_ratio"] =
      std::isfinite(f.max_quadrature_ratio) ? json(f.max_quadrature_ratio) : json("infinite");
  quadrature.context["max_ratio"] = c.quadrature.max_ratio;
  quadrature.judgement =
      above_limit(f.max_quadrature_ratio, c.quadrature.max_ratio, c.quadrature.hysteresis);
  quadrature.message = fmt::format(
      "sample {}: |Y/X| reached {:.3g} in sweep {} (limit {:g}): check the lock-in phase and "
      "capacitive pickup",
      f.sample, f.max_quadrature_ratio, f.sweep_index, c.quadrature.max_ratio);
  evaluate("quadrature", f.sample, settings(c.quadrature), std::move(quadrature), f.t, false);

  Observation heating;
  heating.context = base;
  heating.value = finite(f.excitation_ratio);
  heating.context["excitation_ratio"] = optional_json(heating.value);
  heating.context["max_ratio"] = c.excitation_heating.max_ratio;
  heating.judgement = above_limit(f.excitation_ratio, c.excitation_heating.max_ratio,
                                  c.excitation_heating.hysteresis);
  heating.message = fmt::format(
      "sample {}: e V / k_B T = {:.3g} at {:.4g} K in sweep {} (limit {:g}): the excitation may "
      "heat the electrons",
      f.sample, f.excitation_ratio, f.temperature_k, f.sweep_index, c.excitation_heating.max_ratio);
  evaluate("excitation-heating", f.sample, settings(c.excitation_heating), std::move(heating), f.t,
           false);
}

void judge_verdict(const AlertConfig& c, const VerdictFact& f, const ObservationSink& evaluate) {
  json base = {{"t", f.t},
               {"sweep_index", f.sweep_index},
               {"cooldown", f.cooldown},
               {"state", f.state},
               {"t_sat_k", optional_json(f.t_sat_k)},
               {"lphi_sat_m", optional_json(f.lphi_sat_m)}};
  base["electrons_cooling"] = f.electrons_cooling ? json(*f.electrons_cooling) : json(nullptr);
  base["likely_cause"] = f.likely_cause ? json(*f.likely_cause) : json(nullptr);
  const std::string cause = f.likely_cause ? fmt::format(" (likely cause: {})", *f.likely_cause) : "";
  const std::string t_sat = f.t_sat_k ? fmt::format(", T_sat = {:.3g} K", *f.t_sat_k) : "";
  const std::string l_sat = f.lphi_sat_m ? fmt::format(", L_sat = {:.3g} m", *f.lphi_sat_m) : "";

  Observation saturating;
  saturating.context = base;
  saturating.value = f.t_sat_k;
  saturating.judgement = f.state == "saturating" ? Judgement::bad : Judgement::good;
  saturating.message =
      fmt::format("sample {}, cooldown {}: L_phi(T) is saturating{}{}", f.sample, f.cooldown, t_sat, cause);
  evaluate("verdict-saturating", f.sample, settings(c.verdict_saturating), std::move(saturating),
           f.t, false);

  Observation saturated;
  saturated.context = base;
  saturated.value = f.t_sat_k;
  saturated.judgement = f.state == "saturated" ? Judgement::bad : Judgement::good;
  saturated.message =
      fmt::format("sample {}, cooldown {}: L_phi(T) has saturated{}{}{}", f.sample, f.cooldown, t_sat,
                  l_sat, cause);
  evaluate("verdict-saturated", f.sample, settings(c.verdict_saturated), std::move(saturated), f.t,
           false);

  // No verdict on the electrons yet (null: too few plateaus, as early in a
  // new cooldown) is no news either way: a live alert stays until sigma(0)
  // is seen to follow ln T again, since a warm-up and cool-down meant to fix
  // the heating may not have fixed it.
  Observation cooling;
  cooling.context = base;
  cooling.judgement = !f.electrons_cooling ? Judgement::none
                      : *f.electrons_cooling ? Judgement::good
                                             : Judgement::bad;
  cooling.message = fmt::format(
      "sample {}, cooldown {}: the electrons have stopped cooling: sigma(B=0) no longer follows ln T{}",
      f.sample, f.cooldown, t_sat);
  evaluate("electrons-not-cooling", f.sample, settings(c.electrons_not_cooling), std::move(cooling),
           f.t, false);
}

void HealthRules::judge(const AlertConfig& c, const HealthFact& f, const GapLive& gap_live,
                        const ObservationSink& evaluate) {
  const double now = f.now_unix;
  for (const SourceHealth& source : f.sources) {
    auto [it, first] = sources_.try_emplace(source.name);
    SourceTrack& track = it->second;
    if (first) {
      // The gaps recorded before the engine saw the source are history; a
      // gap alert live from before the restart waits a full quiet_s.
      track.first_seen = now;
      track.gaps = source.gaps;
      if (gap_live(source.name)) track.last_new_gap = now;
    }

    Observation silent;
    const double since = source.last_arrival_unix.value_or(track.first_seen);
    const double age = now - since;
    silent.value = age;
    silent.context = {{"now", now},
                      {"last_arrival", optional_json(source.last_arrival_unix)},
                      {"silent_s", c.source_silent.silent_s}};
    // Only a reading that arrived is good news: a source not heard from
    // since lphid started (and silent before a restart) is not back yet.
    silent.judgement = age > c.source_silent.silent_s ? Judgement::bad
                       : source.last_arrival_unix     ? Judgement::good
                                                      : Judgement::none;
    silent.message =
        source.last_arrival_unix
            ? fmt::format("source {}: no reading for {:.0f} s (limit {:g} s)", source.name, age,
                          c.source_silent.silent_s)
            : fmt::format("source {}: no reading since lphid started {:.0f} s ago (limit {:g} s)",
                          source.name, age, c.source_silent.silent_s);
    evaluate("source-silent", source.name, settings(c.source_silent), std::move(silent), now, true);

    Observation gap;
    if (source.gaps > track.gaps) {
      const std::uint64_t added = source.gaps - track.gaps;
      track.gaps = source.gaps;
      track.last_new_gap = now;
      gap.judgement = Judgement::bad;
      gap.value = static_cast<double>(added);
      gap.context = {{"now", now}, {"new_gaps", added}, {"gaps", source.gaps}};
      gap.message = fmt::format("source {}: {} new gap{} in its sequence numbers ({} in all)",
                                source.name, added, added == 1 ? "" : "s", source.gaps);
      // Each new gap is news: stored and published at once, not throttled.
      evaluate("gap", source.name, settings(c.gap), std::move(gap), now, false);
    } else {
      track.gaps = source.gaps;  // a counter that went back (a new database) is the new baseline
      if (track.last_new_gap && now - *track.last_new_gap >= c.gap.quiet_s) {
        gap.judgement = Judgement::good;
        gap.context = {{"now", now}, {"gaps", source.gaps}};
      }
      evaluate("gap", source.name, settings(c.gap), std::move(gap), now, true);
    }
  }

  if (f.disk_free_bytes) {
    Observation disk;
    disk.value = *f.disk_free_bytes;
    disk.context = {{"now", now},
                    {"disk_free_bytes", *f.disk_free_bytes},
                    {"min_free_bytes", c.disk_space.min_free_bytes}};
    disk.judgement = below_limit(*f.disk_free_bytes, c.disk_space.min_free_bytes, c.disk_space.hysteresis);
    disk.message = fmt::format("{} free on the data directory's file system (limit {})",
                               format_bytes(*f.disk_free_bytes), format_bytes(c.disk_space.min_free_bytes));
    evaluate("disk-space", "", settings(c.disk_space), std::move(disk), now, true);
  }

  Observation lag;
  lag.value = finite(f.writer_lag_s);
  lag.context = {{"now", now}, {"writer_lag_s", optional_json(lag.value)}, {"max_lag_s", c.writer_lag.max_lag_s}};
  lag.judgement = above_limit(f.writer_lag_s, c.writer_lag.max_lag_s, c.writer_lag.hysteresis);
  lag.message = fmt::format("the store writer is {:.1f} s behind the readings (limit {:g} s)",
                            f.writer_lag_s, c.writer_lag.max_lag_s);
  evaluate("writer-lag", "", settings(c.writer_lag), std::move(lag), now, true);
}

}  // namespace lphi::alerts
