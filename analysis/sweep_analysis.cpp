#include "analysis/sweep_analysis.hpp"

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include <fmt/format.h>

#include "analysis/constants.hpp"
#include "analysis/magnetoconductance.hpp"
#include "analysis/sweep_hints.hpp"
#include "analysis/sweep_residuals.hpp"

namespace lphi::sweep {
namespace {

std::string millitesla(double field_t) { return fmt::format("{:.3g} mT", field_t * 1e3); }

double median_value(std::vector<double> v) {
  if (v.empty()) return kNaN;
  const auto mid = v.begin() + static_cast<std::ptrdiff_t>(v.size() / 2);
  std::nth_element(v.begin(), mid, v.end());
  return *mid;
}

void note(Analysis& a, std::string name, std::string sentence) {
  a.reasons.push_back({std::move(name), std::move(sentence)});
}

void advise(Analysis& a, const std::string& line) {
  if (a.advice.empty()) a.advice = line;
}

// Units: a field reach in the hundreds of tesla is a column in mT; an alpha
// far outside [-1, 2] from a sweep that fitted is a resistance in kohm (the
// curve's relative change is then 1000 times too large for e^2/(pi h)).
void check_units(Analysis& a, double reach_t) {
  if (reach_t > 30.0) {
    a.units_suspect = true;
    a.unit_hint = fmt::format(
        "the field reaches {:.4g} T, beyond any laboratory magnet: is the field column in mT?",
        reach_t);
  } else if (a.fit.ok && a.fit.alpha && (*a.fit.alpha > 5.0 || *a.fit.alpha < -3.0)) {
    a.units_suspect = true;
    a.unit_hint = fmt::format(
        "alpha = {:.4g} is far outside [-1, 2]: is the resistance column in kohm (or not per "
        "square)?",
        *a.fit.alpha);
  } else if (a.fit.ok && a.fit.lphi_m > 0.0 && a.fit.lphi_m < 10e-9 && reach_t > 1e-3) {
    a.units_suspect = true;
    a.unit_hint = fmt::format("L_phi = {:.3g} nm is below any film's: is the field column in mT?",
                              a.fit.lphi_m * 1e9);
  }
  if (a.units_suspect) {
    note(a, "units-suspect", a.unit_hint);
    advise(a, a.unit_hint);
  }
}

}  // namespace

bool Analysis::has(std::string_view reason) const {
  return std::any_of(reasons.begin(), reasons.end(),
                     [reason](const Reason& r) { return r.name == reason; });
}

std::vector<std::vector<Reading>> split_at_reversals(std::span<const Reading> readings) {
  std::vector<std::vector<Reading>> legs;
  if (readings.empty()) return legs;
  std::vector<double> steps;
  for (std::size_t i = 1; i < readings.size(); ++i)
    steps.push_back(std::abs(readings[i].field_t - readings[i - 1].field_t));
  const double tolerance = 3.0 * median_value(steps);
  legs.emplace_back();
  legs.back().push_back(readings[0]);
  double direction = 0.0;
  double extreme = readings[0].field_t;  // the turning point so far
  for (std::size_t i = 1; i < readings.size(); ++i) {
    const double b = readings[i].field_t;
    if (direction == 0.0) {
      if (std::abs(b - readings[0].field_t) > tolerance) direction = b > readings[0].field_t ? 1 : -1;
      extreme = b;
    } else if ((b - extreme) * direction >= 0.0) {
      extreme = b;
    } else if (std::abs(b - extreme) > tolerance) {
      // Reversed: the new leg starts at the turning point.
      std::vector<Reading>& current = legs.back();
      std::size_t turn = current.size();
      while (turn > 0 && current[turn - 1].field_t != extreme) --turn;
      std::vector<Reading> next(current.begin() + static_cast<std::ptrdiff_t>(turn > 0 ? turn - 1 : 0),
                                current.end());
      current.resize(turn > 0 ? turn : current.size());
      legs.push_back(std::move(next));
      direction = -direction;
      extreme = b;
    }
    legs.back().push_back(readings[i]);
  }
  return legs;
}

Analysis analyze(std::span<const std::vector<Reading>> legs, const Options& options) {
  Analysis a;
  a.temperature_k = options.temperature_k;
  a.fit.error = "not fitted";
  if (legs.empty() || legs.size() > 2) {
    a.error = fmt::format("a sweep has one or two legs, got {}", legs.size());
    return a;
  }
  for (std::size_t l = 0; l < legs.size(); ++l) {
    if (legs[l].empty()) {
      a.error = fmt::format("leg {} has no readings", l + 1);
      return a;
    }
    for (std::size_t i = 0; i < legs[l].size(); ++i) {
      const Reading& r = legs[l][i];
      if (!std::isfinite(r.field_t)) {
        a.error = fmt::format("leg {} reading {} has a non-finite field", l + 1, i + 1);
        return a;
      }
      if (!std::isfinite(r.rsq_ohm) || !(r.rsq_ohm > 0.0)) {
        a.error = fmt::format("leg {} reading {} (B = {}) has a sheet resistance of {} ohm, not a "
                              "positive number",
                              l + 1, i + 1, millitesla(r.field_t), r.rsq_ohm);
        return a;
      }
    }
  }
  a.ok = true;

  // Spikes, then the centre of each leg.
  std::vector<std::vector<field_axis::LegPoint>> kept(legs.size());
  std::vector<double> taus;
  double reach = 0.0;
  for (std::size_t l = 0; l < legs.size(); ++l) {
    std::vector<conductance::FieldPoint> raw;
    raw.reserve(legs[l].size());
    for (const Reading& r : legs[l]) {
      raw.push_back({r.field_t, r.rsq_ohm});
      reach = std::max(reach, std::abs(r.field_t));
      if (r.time_constant_s > 0.0 && std::isfinite(r.time_constant_s)) taus.push_back(r.time_constant_s);
    }
    LegAxis axis;
    axis.n_readings = raw.size();
    std::vector<bool> dropped(raw.size(), false);
    if (options.reject_spikes) {
      const conductance::SpikeRejection s = conductance::reject_spikes(raw, options.spike_threshold);
      for (std::size_t i : s.dropped) dropped[i] = true;
      axis.n_spikes = s.dropped.size();
    }
    for (std::size_t i = 0; i < raw.size(); ++i)
      if (!dropped[i]) kept[l].push_back({legs[l][i].t_s, legs[l][i].field_t, legs[l][i].rsq_ohm});
    axis.centre = field_axis::find_centre(kept[l]);
    a.n_spikes += axis.n_spikes;
    a.legs.push_back(axis);
  }
  if (a.n_spikes > 0)
    note(a, "spikes-dropped",
         fmt::format("{} isolated spike{} dropped before symmetrizing", a.n_spikes,
                     a.n_spikes == 1 ? "" : "s"));
  if (!taus.empty()) a.time_constant_s = median_value(taus);

  // The offset: each leg shifted by its own centre; the common part and the
  // lag from an up and a down leg.
  std::vector<double> rates;
  std::size_t n_centred = 0;
  for (LegAxis& leg : a.legs) {
    if (!leg.centre.ok) continue;
    ++n_centred;
    // Shifted only by a centre that differs from zero by more than
    // kSignificantOffset of its standard errors: a shift by a centre within
    // its noise would move the mirror point by that noise for nothing.
    if (std::abs(leg.centre.centre_t) > kSignificantOffset * leg.centre.centre_err_t)
      leg.shift_t = leg.centre.centre_t;
    if (std::isfinite(leg.centre.rate_t_per_s)) rates.push_back(leg.centre.rate_t_per_s);
  }
  if (n_centred == 2 && a.legs[0].centre.direction * a.legs[1].centre.direction < 0.0) {
    const bool first_up = a.legs[0].centre.direction > 0.0;
    const field_axis::Split s =
        field_axis::split(first_up ? a.legs[0].centre : a.legs[1].centre,
                          first_up ? a.legs[1].centre : a.legs[0].centre);
    a.field_offset_t = s.offset_t;
    a.field_offset_err_t = s.offset_err_t;
    a.lag_shift_t = s.opposite_t;
    a.field_lag_s = s.delay_s;
    a.field_lag_err_s = s.delay_err_s;
    a.offset_known = true;
  } else if (n_centred > 0) {
    double sw = 0.0, swc = 0.0;
    for (const LegAxis& leg : a.legs) {
      if (!leg.centre.ok) continue;
      const double w = 1.0 / (leg.centre.centre_err_t * leg.centre.centre_err_t);
      sw += w;
      swc += w * leg.centre.centre_t;
    }
    a.field_offset_t = swc / sw;
    a.field_offset_err_t = 1.0 / std::sqrt(sw);
    a.offset_known = true;
    // A leg that could not be centred takes the others' offset.
    for (LegAxis& leg : a.legs)
      if (!leg.centre.ok) leg.shift_t = a.field_offset_t;
  }
  if (a.offset_known) a.remanent_field_t = -a.field_offset_t;
  if (!rates.empty()) a.sweep_rate_t_per_s = median_value(rates);

  bool crosses_zero = false;
  for (const std::vector<field_axis::LegPoint>& leg : kept) {
    bool below = false, above = false;
    for (const field_axis::LegPoint& p : leg) {
      below = below || p.field_t < 0.0;
      above = above || p.field_t > 0.0;
    }
    crosses_zero = crosses_zero || (below && above);
  }
  if (!a.offset_known) {
    const std::string why = a.legs.front().centre.reason;
    if (crosses_zero && why.find("no curvature") != std::string::npos) {
      a.flat = true;
      note(a, "no-wl-signal", "no weak-localization signal above the noise: " + why);
    } else {
      note(a, "field-offset-unknown", "the field offset could not be measured: " + why);
    }
  }

  // Coverage before fitting, on the field readings (a hole is named where
  // the operator sees it; an offset is small against any hole that matters).
  std::vector<std::vector<double>> shifted(kept.size()), reading(kept.size());
  for (std::size_t l = 0; l < kept.size(); ++l)
    for (const field_axis::LegPoint& p : kept[l]) {
      shifted[l].push_back(p.field_t - a.legs[l].shift_t);
      reading[l].push_back(p.field_t);
    }
  a.coverage = field_axis::coverage_before(reading, options.coverage);
  if (!a.coverage.ok) {
    note(a, a.coverage.reason, a.coverage.sentence);
    advise(a, a.coverage.advice);
  }

  if (a.flat) {
    a.fit.error = "no weak-localization signal above the noise";
  } else if (a.coverage.ok) {
    std::vector<conductance::FieldPoint> points;
    for (std::size_t l = 0; l < kept.size(); ++l)
      for (std::size_t i = 0; i < kept[l].size(); ++i)
        points.push_back({shifted[l][i], kept[l][i].value});
    conductance::PrepareOptions prep;
    prep.allow_one_sided = options.allow_one_sided;
    const conductance::PrepareStatus status = conductance::prepare_sweep(points, prep, a.prepared);
    a.prepared.field_offset_t = a.field_offset_t;
    if (!status.ok) {
      a.fit.error = "the sweep could not be prepared: " + status.error;
      note(a, "not-prepared", a.fit.error);
    } else {
      a.fitted = true;
      // A one-sided sweep keeps its odd part: the fit carries it (k |B|).
      fit::SweepFitOptions fit_options = options.fit;
      if (!a.prepared.symmetrized) fit_options.fit_odd_term = true;
      a.fit = fit::fit_sweep(a.prepared.points, fit_options);
      // The centring is kept only if the model describes the centred sweep
      // better than the sweep about the reading's zero: a centre that noise
      // moved off (its error understated, see field_axis.hpp) then costs
      // nothing, while a real offset or lag lowers the residuals by far.
      bool any_shift = false;
      for (const LegAxis& leg : a.legs) any_shift = any_shift || leg.shift_t != 0.0;
      if (any_shift && a.fit.ok) {
        std::vector<conductance::FieldPoint> unshifted;
        for (std::size_t l = 0; l < kept.size(); ++l)
          for (const field_axis::LegPoint& p : kept[l]) unshifted.push_back({p.field_t, p.value});
        conductance::PreparedSweep plain;
        if (conductance::prepare_sweep(unshifted, prep, plain).ok) {
          fit::SweepFitOptions plain_options = options.fit;
          if (!plain.symmetrized) plain_options.fit_odd_term = true;
          fit::SweepFitResult plain_fit = fit::fit_sweep(plain.points, plain_options);
          // Judged against each preparation's own noise: interpolating the
          // mirror branch averages noise away, so the raw residual variances
          // of the two are not comparable.
          const auto centred_chi2 = fit::chi2_red_against_noise(a.prepared.points, a.fit, fit_options);
          const auto plain_chi2 = plain_fit.ok ? fit::chi2_red_against_noise(plain.points, plain_fit, plain_options)
                                               : std::nullopt;
          if (plain_chi2 && (!centred_chi2 || *plain_chi2 <= *centred_chi2)) {
            a.prepared = std::move(plain);
            a.prepared.field_offset_t = 0.0;
            a.fit = std::move(plain_fit);
            fit_options = plain_options;
            for (LegAxis& leg : a.legs) leg.shift_t = 0.0;
            shifted = reading;
          }
        }
      }
      a.point_noise_s = conductance::point_noise_s(a.prepared.points);
      if (a.fit.ok) {
        a.chi2_red_quantum = a.fit.chi2_red;
        a.chi2_red = fit::chi2_red_against_noise(a.prepared.points, a.fit, fit_options);
        if (a.chi2_red) a.error_scale = std::sqrt(std::max(1.0, *a.chi2_red));
        // Structure in the residuals (the runs test on their signs, over
        // blocks as long as the noise's correlation: fit::judge_quality)
        // and the model hints (fit::model_hints).
        const fit::FitQuality quality = fit::judge_quality(a.prepared.points, a.fit, fit_options);
        a.runs_p = quality.runs_p;
        if (quality.runs_p < fit::kRunsPUnusable)
          note(a, "residual-structure",
               fmt::format("the residuals have structure: runs test p = {:.2g} (limit {:.0g}): {}",
                           quality.runs_p, fit::kRunsPUnusable, quality.reason));
        a.hints = fit::model_hints(a.prepared.points, a.fit, fit_options, fit_options.geometry);
      }
      a.sigma0_s = a.prepared.sigma0_s;
      a.sigma0_err_s = a.prepared.sigma0_err_s;
      if (a.fit.ok && options.fit.fit_offset && std::isfinite(a.fit.offset_s) &&
          a.fit.offset_err_s > 0.0) {
        a.sigma0_s = a.prepared.sigma0_s + a.fit.offset_s;
        a.sigma0_err_s = a.fit.offset_err_s;
      }
      if (a.sigma0_s > 0.0) {
        a.rsq0_ohm = 1.0 / a.sigma0_s;
        a.rsq0_err_ohm = a.sigma0_err_s / (a.sigma0_s * a.sigma0_s);
      }
    }
  }
  if (!a.fitted && !a.flat && a.coverage.ok && a.fit.error == "not fitted")
    a.fit.error = "the sweep was not fitted";

  // Judge the fit.
  // The field at which the fitted model leaves its low-field regime (its
  // characteristic field, analysis/sweep_fit.hpp): B_phi for a film, the
  // larger of B_phi and B_so with spin-orbit, sqrt(3) hbar / (e w L_phi) for
  // a wire. The cusp, the offset and the sweep rate are judged against it.
  double b_phi = a.fit.ok ? a.fit.b_phi_t : kNaN;
  if (a.fit.ok && options.fit.model == mc::Model::wire1d && options.fit.geometry.width_m > 0.0) {
    auto wire_field = [&](double length_m) {
      return std::sqrt(3.0) * si::hbar_j_s / (si::elementary_charge_c * options.fit.geometry.width_m * length_m);
    };
    b_phi = wire_field(a.fit.lphi_m);
    if (a.fit.lso_m && *a.fit.lso_m > 0.0) b_phi = std::max(b_phi, wire_field(*a.fit.lso_m));
  } else if (a.fit.ok && a.fit.lso_m && *a.fit.lso_m > 0.0) {
    b_phi = std::max(b_phi, mc::characteristic_field_t(*a.fit.lso_m));
  }
  a.characteristic_field_t = b_phi;
  if (a.fitted && !a.fit.ok) note(a, "fit-failed", "the fit failed: " + a.fit.error);
  if (a.fitted && !a.prepared.symmetrized)
    note(a, "one-sided",
         "the sweep is one-sided: not symmetrized; the fit carries an odd-in-B term k |B| for "
         "its Hall part");
  if (a.fit.ok) {
    if (a.chi2_red && *a.chi2_red > options.max_chi2_red)
      note(a, "fit-chi2",
           fmt::format("chi2_red = {:.3g} against the sweep's own noise (limit {:.3g})",
                       *a.chi2_red, options.max_chi2_red));
    for (fit::Flag f : a.fit.flags) {
      if (f == fit::Flag::window_too_narrow || f == fit::Flag::not_converged ||
          f == fit::Flag::too_few_points || f == fit::Flag::parameter_at_limit)
        note(a, std::string(fit::flag_name(f)),
             "the fit is flagged " + std::string(fit::flag_name(f)));
    }
    const field_axis::Coverage after = field_axis::coverage_after(shifted, b_phi, options.coverage);
    if (!after.ok) {
      a.coverage = after;
      note(a, after.reason, after.sentence);
      advise(a, after.advice);
    }
    const field_axis::RateCheck rate =
        field_axis::rate_check(a.sweep_rate_t_per_s, a.time_constant_s, b_phi);
    if (rate.known) {
      a.max_sweep_rate_t_per_s = rate.max_rate_t_per_s;
      a.too_fast = rate.too_fast;
      if (rate.too_fast) {
        note(a, "swept-too-fast",
             fmt::format("the sweep ran at {:.3g} mT/min near zero field: with the lock-in's "
                         "{:.3g} s time constant the curve is smeared over {} = {:.2g} B_phi",
                         a.sweep_rate_t_per_s * 6e4, a.time_constant_s, millitesla(rate.shift_t),
                         rate.shift_t / b_phi));
        advise(a, fmt::format("slow the sweep to {:.2g} mT/min near zero field",
                              rate.max_rate_t_per_s * 6e4));
      }
    }
    if (a.offset_known) {
      const double limit = kOffsetAlertFraction * b_phi;
      const bool lag_large = std::isfinite(a.lag_shift_t) && std::abs(a.lag_shift_t) > limit;
      a.offset_large = std::abs(a.field_offset_t) > limit || a.field_offset_err_t > limit || lag_large;
      if (a.field_offset_err_t > limit)
        note(a, "field-offset-uncertain",
             fmt::format("the field offset is uncertain by {}, more than {:.1f} B_phi = {}",
                         millitesla(a.field_offset_err_t), kOffsetAlertFraction, millitesla(limit)));
      if (std::abs(a.field_offset_t) > limit) {
        note(a, "field-offset",
             fmt::format("the field offset is {} ({:.2g} B_phi), corrected before the fit",
                         millitesla(a.field_offset_t), a.field_offset_t / b_phi));
        advise(a, fmt::format("the field offset is {}: the magnet holds a remanent field",
                              millitesla(a.field_offset_t)));
      }
      if (lag_large) {
        note(a, "field-lag",
             fmt::format("the up and down legs' centres differ by {} ({:.2g} B_phi): a lag of "
                         "{:.3g} s, corrected before the fit",
                         millitesla(2.0 * a.lag_shift_t), 2.0 * a.lag_shift_t / b_phi,
                         a.field_lag_s));
        advise(a, fmt::format("the up and down legs lag by {:.3g} s: slow the sweep or shorten the "
                              "lock-in's time constant",
                              a.field_lag_s));
      }
    }
    if (a.fit.has(fit::Flag::alpha_held) || a.fit.has(fit::Flag::alpha_lphi_degenerate) ||
        a.fit.has(fit::Flag::window_too_narrow))
      advise(a, fmt::format("extend the sweep to +-{} to separate alpha from L_phi",
                            millitesla(options.fit.window_factor * a.fit.b_phi_t)));
  }
  // A hint does not keep the sweep out: it names the model that would suit
  // it, with the numbers (both fits' chi2_red for spin-orbit).
  for (const fit::ModelHint& h : a.hints) {
    note(a, "model-hint-" + h.name, h.message);
    advise(a, fmt::format("try the {} model: {}", mc::model_name(h.suggested), h.message));
  }
  if (a.flat) advise(a, "no weak-localization signal above the noise: check the sample's "
                        "contacts and the lock-in's sensitivity");
  check_units(a, reach);

  // Usable for L_phi(T): a good fit whose cusp is resolved and trusted.
  static const char* const kExcluding[] = {
      "no-wl-signal",     "hole-across-zero", "too-few-near-zero", "no-readings",
      "not-prepared",     "fit-failed",       "fit-chi2",
      "window-too-narrow", "not-converged",   "too-few-points",    "parameter-at-limit",
      "cusp-not-resolved", "swept-too-fast",  "field-offset-uncertain", "units-suspect",
      "residual-structure"};
  a.usable = a.fit.ok && std::isfinite(a.fit.lphi_m) && a.fit.lphi_m > 0.0;
  for (const char* name : kExcluding)
    if (a.has(name)) a.usable = false;
  return a;
}

}  // namespace lphi::sweep
