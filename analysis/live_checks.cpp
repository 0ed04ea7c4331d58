#include "analysis/live_checks.hpp"

#include <cmath>
#include <limits>

#include "analysis/constants.hpp"

namespace lphi::checks {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

bool finite_nonneg(double v) { return std::isfinite(v) && v >= 0.0; }

Regime expected_regime(mc::Model model) {
  switch (model) {
    case mc::Model::wire1d: return Regime::quasi_1d;
    case mc::Model::kawabata3d: return Regime::three_d;
    case mc::Model::hln2d:
    case mc::Model::hln2d_so: break;
  }
  return Regime::two_d;
}

}  // namespace

std::string_view regime_name(Regime r) {
  switch (r) {
    case Regime::two_d: return "2d";
    case Regime::quasi_1d: return "quasi-1d";
    case Regime::three_d: return "3d";
    case Regime::crossover: break;
  }
  return "crossover";
}

double thermal_length_m(double diffusion_m2s, double temperature_k) {
  if (!std::isfinite(diffusion_m2s) || !std::isfinite(temperature_k) || diffusion_m2s <= 0.0 ||
      temperature_k <= 0.0)
    return kNaN;
  return std::sqrt(si::hbar_j_s * diffusion_m2s / (si::boltzmann_j_per_k * temperature_k));
}

Regime classify(double length_m, double width_m, double thickness_m, double margin) {
  const double w = width_m > 0.0 ? width_m : std::numeric_limits<double>::infinity();
  const double t = thickness_m;  // 0: thin
  const double l = length_m;
  auto much_less = [margin](double a, double b) { return margin * a <= b; };
  if (much_less(l, t)) return Regime::three_d;
  if (much_less(w, l) && much_less(t, l)) return Regime::quasi_1d;
  if (much_less(t, l) && much_less(l, w)) return Regime::two_d;
  return Regime::crossover;
}

RegimeCheck dimensional_regime(double lphi_m, double width_m, double thickness_m,
                               mc::Model model, double diffusion_m2s, double temperature_k,
                               const RegimeOptions& options) {
  RegimeCheck c;
  c.lphi_m = lphi_m;
  c.width_m = width_m;
  c.thickness_m = thickness_m;
  if (!std::isfinite(lphi_m) || lphi_m <= 0.0)
    c.error = "lphi_m must be finite and > 0";
  else if (!finite_nonneg(width_m))
    c.error = "width_m must be finite and >= 0 (0: unknown)";
  else if (!finite_nonneg(thickness_m))
    c.error = "thickness_m must be finite and >= 0 (0: unknown)";
  else if (!finite_nonneg(diffusion_m2s))
    c.error = "diffusion_m2s must be finite and >= 0 (0: unknown)";
  else if (!finite_nonneg(temperature_k))
    c.error = "temperature_k must be finite and >= 0 (0: unknown)";
  else if (!std::isfinite(options.margin) || options.margin < 1.0)
    c.error = "margin must be finite and >= 1";
  if (!c.error.empty()) return c;

  c.regime = classify(lphi_m, width_m, thickness_m, options.margin);
  c.model_consistent = c.regime == expected_regime(model);
  if (diffusion_m2s > 0.0 && temperature_k > 0.0) {
    c.thermal_length_m = thermal_length_m(diffusion_m2s, temperature_k);
    c.interaction_regime = classify(*c.thermal_length_m, width_m, thickness_m, options.margin);
  }
  return c;
}

double thermal_voltage_v(double temperature_k) {
  return si::boltzmann_j_per_k * temperature_k / si::elementary_charge_c;
}

double wire_electron_temperature_k(double temperature_k, double sample_voltage_v) {
  if (!std::isfinite(temperature_k) || !std::isfinite(sample_voltage_v) || temperature_k <= 0.0)
    return kNaN;
  const double ev_over_kb = si::elementary_charge_c * sample_voltage_v / si::boltzmann_j_per_k;
  return std::sqrt(temperature_k * temperature_k +
                   3.0 / (4.0 * si::pi * si::pi) * ev_over_kb * ev_over_kb);
}

HeatingCheck excitation_heating(double sample_voltage_v, double temperature_k, double lphi_m,
                                double probe_length_m, const HeatingOptions& options) {
  HeatingCheck c;
  if (!std::isfinite(sample_voltage_v))
    c.error = "sample_voltage_v must be finite";
  else if (!std::isfinite(temperature_k) || temperature_k <= 0.0)
    c.error = "temperature_k must be finite and > 0";
  else if (!finite_nonneg(lphi_m))
    c.error = "lphi_m must be finite and >= 0 (0: unknown)";
  else if (!finite_nonneg(probe_length_m))
    c.error = "probe_length_m must be finite and >= 0 (0: unknown)";
  else if (!std::isfinite(options.max_ratio) || options.max_ratio <= 0.0)
    c.error = "max_ratio must be finite and > 0";
  if (!c.error.empty()) return c;

  const double v = std::abs(sample_voltage_v);
  c.thermal_voltage_v = thermal_voltage_v(temperature_k);
  c.ratio = v / c.thermal_voltage_v;
  c.wire_electron_temperature_k = wire_electron_temperature_k(temperature_k, v);
  if (lphi_m > 0.0 && probe_length_m > 0.0) c.coherence_length_ratio = c.ratio * lphi_m / probe_length_m;
  c.risk = c.ratio >= options.max_ratio;
  return c;
}

LockinCheck lockin_reading(double x_v, double y_v, double range_v, bool overload_flag,
                           const LockinOptions& options) {
  LockinCheck c;
  if (!std::isfinite(x_v))
    c.error = "x_v must be finite";
  else if (!std::isfinite(y_v))
    c.error = "y_v must be finite";
  else if (!finite_nonneg(range_v))
    c.error = "range_v must be finite and >= 0 (0: unknown)";
  else if (!finite_nonneg(options.max_quadrature_ratio))
    c.error = "max_quadrature_ratio must be finite and >= 0";
  if (!c.error.empty()) return c;

  const double ax = std::abs(x_v), ay = std::abs(y_v);
  c.overload = overload_flag || (range_v > 0.0 && (ax >= range_v || ay >= range_v));
  if (ax > 0.0)
    c.quadrature_ratio = ay / ax;
  else
    c.quadrature_ratio = ay > 0.0 ? std::numeric_limits<double>::infinity() : 0.0;
  c.large_quadrature = c.quadrature_ratio > options.max_quadrature_ratio;
  return c;
}

FitQualityCheck fit_quality(const fit::SweepFitResult& fit, bool point_errors_given,
                            const FitQualityOptions& options) {
  FitQualityCheck c;
  c.chi2_red = fit.chi2_red;
  if (!fit.ok) {
    c.failed = true;
    c.reasons.push_back("fit-failed: " + (fit.error.empty() ? std::string("no reason given") : fit.error));
    return c;
  }
  c.not_converged = !fit.converged || fit.has(fit::Flag::not_converged);
  if (c.not_converged) c.reasons.emplace_back("not-converged");
  if (point_errors_given && !(fit.chi2_red <= options.max_chi2_red)) {
    c.chi2_above_limit = true;
    c.reasons.emplace_back("chi2-red-above-limit");
  }
  bool disqualified = c.not_converged || c.chi2_above_limit;
  for (fit::Flag f : fit.flags) {
    if (f == fit::Flag::not_converged) continue;  // reported above
    c.reasons.emplace_back(fit::flag_name(f));
    if (f == fit::Flag::window_too_narrow || f == fit::Flag::too_few_points ||
        f == fit::Flag::parameter_at_limit)
      disqualified = true;
  }
  c.usable_for_dephasing = !disqualified;
  return c;
}

}  // namespace lphi::checks
