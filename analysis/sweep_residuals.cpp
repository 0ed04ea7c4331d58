#include "analysis/sweep_residuals.hpp"

#include <cmath>
#include <limits>
#include <vector>

#include "analysis/constants.hpp"
#include "analysis/magnetoconductance.hpp"

namespace lphi::fit {

namespace {

bool fits_lso(const SweepFitOptions& options) {
  return options.model == mc::Model::hln2d_so ||
         (options.model == mc::Model::wire1d && options.wire_spin_orbit);
}

// alpha was fitted freely when it has a positive error (a held alpha has
// alpha_err = 0, sweep_fit.hpp).
bool alpha_free(const SweepFitResult& result) {
  return result.model == mc::Model::hln2d && result.alpha && result.alpha_err &&
         *result.alpha_err > 0.0;
}

}  // namespace

int fitted_parameter_count(const SweepFitResult& result, const SweepFitOptions& options) {
  int p = 1;  // L_phi
  if (fits_lso(options)) ++p;
  if (alpha_free(result)) ++p;
  if (options.fit_offset) ++p;
  if (options.fit_background) ++p;
  return p;
}

double fitted_delta_sigma_s(const SweepFitResult& result, const SweepFitOptions& options,
                            double field_t) {
  if (!result.ok) return std::numeric_limits<double>::quiet_NaN();
  const double lphi = result.lphi_m;
  const double lso = result.lso_m.value_or(0.0);
  double model = 0.0;
  switch (result.model) {
    case mc::Model::hln2d:
      model = mc::hln2d(field_t, result.alpha.value_or(options.alpha_default), lphi);
      break;
    case mc::Model::hln2d_so:
      model = mc::hln2d_so(field_t, lphi, lso);
      break;
    case mc::Model::wire1d:
      model = fits_lso(options) ? mc::wire1d_so(field_t, lphi, lso, options.geometry.width_m)
                                : mc::wire1d(field_t, lphi, options.geometry.width_m);
      break;
    case mc::Model::kawabata3d:
      model = mc::kawabata3d(field_t, lphi, options.geometry.thickness_m);
      break;
  }
  double value = si::wl_conductance_s * model;
  if (options.fit_offset) value += result.offset_s;
  if (options.fit_background && result.background_s_per_t2)
    value += *result.background_s_per_t2 * field_t * field_t;
  return value;
}

std::optional<double> chi2_red_against_noise(std::span<const conductance::DeltaSigmaPoint> points,
                                             const SweepFitResult& result,
                                             const SweepFitOptions& options,
                                             std::size_t half_width) {
  if (!result.ok) return std::nullopt;
  std::vector<conductance::DeltaSigmaPoint> residuals(points.begin(), points.end());
  for (conductance::DeltaSigmaPoint& r : residuals)
    r.delta_sigma_s -= fitted_delta_sigma_s(result, options, r.field_t);
  const std::vector<double> noise = conductance::point_noise_profile_s(residuals, half_width);
  double chi2 = 0.0;
  std::size_t n = 0;
  for (std::size_t i = 0; i < residuals.size(); ++i) {
    if (!(std::fabs(residuals[i].field_t) <= result.field_window_t)) continue;
    const double s = noise[i];
    if (!(s > 0.0) || !std::isfinite(s)) return std::nullopt;
    const double r = residuals[i].delta_sigma_s / s;
    if (!std::isfinite(r)) return std::nullopt;
    chi2 += r * r;
    ++n;
  }
  const int p = fitted_parameter_count(result, options);
  if (n <= static_cast<std::size_t>(p)) return std::nullopt;
  return chi2 / static_cast<double>(n - static_cast<std::size_t>(p));
}

}  // namespace lphi::fit
