#include "analysis/verdict.hpp"

#include <algorithm>
#include <cmath>

#include <fmt/format.h>

#include "analysis/constants.hpp"

namespace lphi::verdict {

namespace {

std::string format_k(double t_k) { return fmt::format("{:.4g} K", t_k); }

std::string format_g(double v) { return fmt::format("{:.3g}", v); }

}  // namespace

std::string_view cause_name(Cause c) {
  switch (c) {
    case Cause::intrinsic: return "intrinsic";
    case Cause::electron_heating_or_noise: return "electron-heating-or-noise";
    case Cause::unknown: break;
  }
  return "unknown";
}

std::string validate(const VerdictOptions& o) {
  if (o.dimension < 1 || o.dimension > 3) return "dimension must be 1, 2 or 3";
  if (!std::isfinite(o.alpha)) return "alpha must be finite";
  if (!std::isfinite(o.heating_match_factor) || o.heating_match_factor < 1.0)
    return "heating_match_factor must be finite and >= 1";
  if (!std::isfinite(o.intrinsic_below_ratio) || o.intrinsic_below_ratio <= 0.0 ||
      o.intrinsic_below_ratio > 1.0)
    return "intrinsic_below_ratio must be in (0, 1]";
  if (!std::isfinite(o.min_slope_sigmas) || o.min_slope_sigmas < 0.0)
    return "min_slope_sigmas must be finite and >= 0";
  return {};
}

std::optional<double> model_lphi_m(const dephasing::DephasingResult& d, double temperature_k) {
  if (d.state == dephasing::State::insufficient_data) return std::nullopt;
  if (!std::isfinite(temperature_k) || temperature_k <= 0.0) return std::nullopt;
  double inverse_square = 0.0;  // L_phi^-2
  bool any = false;
  if (d.prefactor_b && d.exponent_p) {
    inverse_square += *d.prefactor_b * std::pow(temperature_k, *d.exponent_p);
    any = true;
  }
  if (d.lphi_sat_m && *d.lphi_sat_m > 0.0) {
    inverse_square += 1.0 / (*d.lphi_sat_m * *d.lphi_sat_m);
    any = true;
  }
  if (!any || !(inverse_square > 0.0) || !std::isfinite(inverse_square)) return std::nullopt;
  return 1.0 / std::sqrt(inverse_square);
}

std::vector<thermometry::ZeroFieldPoint> interaction_part(
    std::span<const thermometry::ZeroFieldPoint> sigma0, const dephasing::DephasingResult& d,
    double alpha) {
  std::vector<thermometry::ZeroFieldPoint> out;
  if (!std::isfinite(alpha) || sigma0.empty()) return out;
  double t_ref = d.reference_temperature_k;
  if (!(t_ref > 0.0)) t_ref = sigma0.front().temperature_k;
  const auto l_ref = model_lphi_m(d, t_ref);
  if (!l_ref) return out;
  out.reserve(sigma0.size());
  for (const auto& p : sigma0) {
    thermometry::ZeroFieldPoint q = p;
    // A point the model cannot be evaluated at is passed on unchanged, so
    // that the thermometry refuses it with its own message.
    if (const auto l = model_lphi_m(d, p.temperature_k))
      q.sigma_s = p.sigma_s + alpha * si::wl_conductance_s * 2.0 * std::log(*l / *l_ref);
    out.push_back(q);
  }
  return out;
}

ElectronThermometer electron_thermometer(std::span<const thermometry::ZeroFieldPoint> sigma0,
                                         const dephasing::DephasingResult& d,
                                         const VerdictOptions& options) {
  ElectronThermometer th;
  th.raw = thermometry::analyse_zero_field(sigma0, options.thermometry);
  bool first = true;
  for (const auto& p : sigma0) {
    if (!std::isfinite(p.temperature_k) || p.temperature_k <= 0.0) continue;
    th.t_min_k = first ? p.temperature_k : std::min(th.t_min_k, p.temperature_k);
    th.t_max_k = first ? p.temperature_k : std::max(th.t_max_k, p.temperature_k);
    first = false;
  }
  const auto corrected = options.dimension == 2 ? interaction_part(sigma0, d, options.alpha)
                                                : std::vector<thermometry::ZeroFieldPoint>{};
  if (!corrected.empty()) {
    th.result = thermometry::analyse_zero_field(corrected, options.thermometry);
    th.weak_localization_removed = true;
  } else {
    th.result = th.raw;
  }
  return th;
}

Verdict decide(const dephasing::DephasingResult& dephasing, const ElectronThermometer& th,
               const VerdictOptions& options) {
  Verdict v;
  v.state = dephasing.state;
  v.error = validate(options);
  if (!v.error.empty()) {
    v.notes.push_back("options refused: " + v.error);
    return v;
  }
  const auto& r = th.result;
  Evidence& ev = v.evidence;
  ev.t_sat_k = dephasing.t_sat_k;
  ev.t_sat_err_k = dephasing.t_sat_err_k;
  ev.t_floor_k = r.floor_temperature_k;
  ev.t_floor_err_k = r.floor_temperature_err_k;
  if (ev.t_sat_k && ev.t_floor_k) ev.floor_over_sat = *ev.t_floor_k / *ev.t_sat_k;
  ev.thermometer_t_min_k = th.t_min_k;
  ev.interaction_slope_kappa = r.slope_kappa;
  ev.interaction_slope_kappa_err = r.slope_kappa_err;
  ev.departure_p_value = r.p_value;
  ev.weak_localization_removed = th.weak_localization_removed;

  // ---- electrons_cooling
  if (options.dimension != 2) {
    v.notes.push_back("electron cooling not checked: the ln T thermometer is the 2D form");
  } else if (!r.error.empty()) {
    v.notes.push_back("electron cooling unknown: zero-field data refused: " + r.error);
  } else if (!r.sufficient) {
    v.notes.push_back("electron cooling unknown: too few zero-field temperatures or too small a span");
  } else if (r.departs) {
    if (th.weak_localization_removed) {
      v.electrons_cooling = false;
      v.notes.push_back(
          "electrons not cooling: sigma(0) less its weak-localization part leaves ln T" +
          (r.floor_temperature_k ? " below " + format_k(*r.floor_temperature_k)
                                 : std::string(" over the whole range")));
    } else {
      v.notes.push_back(
          "electron cooling unknown: sigma(0) leaves ln T, but without an L_phi(T) model a "
          "change of slope (intrinsic) cannot be told from a flattening (hot electrons)");
    }
  } else if (r.slope_kappa > 0.0 && r.slope_kappa >= options.min_slope_sigmas * r.slope_kappa_err) {
    v.electrons_cooling = true;
    v.notes.push_back(std::string("electrons cooling: sigma(0)") +
                      (th.weak_localization_removed ? " less its weak-localization part" : "") +
                      " follows ln T down to " + format_k(th.t_min_k) + " (slope " +
                      format_g(r.slope_kappa) + " +- " + format_g(r.slope_kappa_err) +
                      " e^2/(pi h))");
  } else {
    v.notes.push_back("electron cooling unknown: the ln T slope of sigma(0) is not resolved (" +
                      format_g(r.slope_kappa) + " +- " + format_g(r.slope_kappa_err) +
                      "), so it is no thermometer");
  }

  // ---- likely_cause
  const bool saturation = dephasing.state == dephasing::State::saturating ||
                          dephasing.state == dephasing::State::saturated;
  if (!saturation) return v;
  const bool lphi_flat = !dephasing.t_sat_k && dephasing.temperature_independent;
  Cause cause = Cause::unknown;
  if (!v.electrons_cooling) {
    v.notes.push_back("cause unknown: electron cooling unknown");
  } else if (!*v.electrons_cooling) {
    if (ev.floor_over_sat) {
      const double f = options.heating_match_factor;
      if (*ev.floor_over_sat <= f && *ev.floor_over_sat >= 1.0 / f) {
        cause = Cause::electron_heating_or_noise;
        v.notes.push_back("electron heating or noise: the electrons stop cooling at T_floor = " +
                          format_k(*ev.t_floor_k) + ", where L_phi saturates (T_sat = " +
                          format_k(*ev.t_sat_k) + ")");
      } else {
        v.notes.push_back("cause unknown: the electrons stop cooling at " + format_k(*ev.t_floor_k) +
                          ", not near T_sat = " + format_k(*ev.t_sat_k));
      }
    } else if (lphi_flat && !r.floor_temperature_k && !r.floor_at_boundary) {
      cause = Cause::electron_heating_or_noise;
      v.notes.push_back(
          "electron heating or noise: L_phi and sigma(0) are both flat over the whole range");
    } else {
      v.notes.push_back("cause unknown: no T_sat or T_floor to compare");
    }
  } else {
    if (ev.t_sat_k) {
      if (th.t_min_k <= options.intrinsic_below_ratio * *ev.t_sat_k) {
        cause = Cause::intrinsic;
        v.notes.push_back("intrinsic: the electrons keep cooling down to " + format_k(th.t_min_k) +
                          ", well below T_sat = " + format_k(*ev.t_sat_k));
      } else {
        v.notes.push_back("cause unknown: the zero-field data stop at " + format_k(th.t_min_k) +
                          ", not well below T_sat = " + format_k(*ev.t_sat_k));
      }
    } else if (lphi_flat) {
      cause = Cause::intrinsic;
      v.notes.push_back("intrinsic: L_phi is flat over the whole range while the electrons cool");
    } else {
      v.notes.push_back("cause unknown: the dephasing fit reports no T_sat");
    }
  }
  v.likely_cause = cause;
  return v;
}

Verdict assess(const dephasing::DephasingResult& dephasing,
               std::span<const thermometry::ZeroFieldPoint> sigma0, const VerdictOptions& options) {
  return decide(dephasing, electron_thermometer(sigma0, dephasing, options), options);
}

}  // namespace lphi::verdict
