// Model hints for one sweep fit (analysis/sweep_hints.hpp).
#include "analysis/sweep_hints.hpp"

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include <fmt/format.h>

#include "analysis/sweep_residuals.hpp"

namespace lphi::fit {
namespace {

// The data's mean and its standard error in kHintBins bins of equal count
// over the window, in field order.
struct Bin {
  double mean = 0.0, error = 0.0;
};

std::vector<Bin> binned(std::span<const conductance::DeltaSigmaPoint> points, double window_t,
                        double noise_s) {
  std::vector<double> y;
  for (const conductance::DeltaSigmaPoint& p : points)
    if (std::fabs(p.field_t) <= window_t) y.push_back(p.delta_sigma_s);
  std::vector<Bin> bins;
  if (y.size() < 3 * kHintBins) return bins;
  for (std::size_t b = 0; b < kHintBins; ++b) {
    const std::size_t lo = b * y.size() / kHintBins, hi = (b + 1) * y.size() / kHintBins;
    double sum = 0.0;
    for (std::size_t i = lo; i < hi; ++i) sum += y[i];
    const double m = static_cast<double>(hi - lo);
    bins.push_back({sum / m, noise_s / std::sqrt(m)});
  }
  return bins;
}

// The antilocalization dip of analysis/sweep_hints.hpp in binned data: a
// fall from the first bin to a minimum, then a rise, each beyond kDipSigmas
// combined errors.
bool antilocalization_dip(const std::vector<Bin>& bins) {
  if (bins.size() < 3) return false;
  const auto lowest = std::min_element(bins.begin(), bins.end(),
                                       [](const Bin& a, const Bin& b) { return a.mean < b.mean; });
  if (lowest == bins.begin() || lowest + 1 == bins.end()) return false;
  auto beyond = [](const Bin& high, const Bin& low) {
    return high.mean - low.mean > kDipSigmas * std::hypot(high.error, low.error);
  };
  const bool falls = beyond(bins.front(), *lowest);
  const bool rises =
      std::any_of(lowest + 1, bins.end(), [&](const Bin& b) { return beyond(b, *lowest); });
  return falls && rises;
}

std::string chi2_text(const std::optional<double>& chi2_red) {
  return chi2_red ? fmt::format("{:.3g}", *chi2_red) : std::string("n/a");
}

}  // namespace

std::vector<ModelHint> model_hints(std::span<const conductance::DeltaSigmaPoint> points,
                                   const SweepFitResult& result, const SweepFitOptions& options,
                                   const SampleGeometry& geometry) {
  std::vector<ModelHint> hints;
  if (!result.ok || !std::isfinite(result.lphi_m)) return hints;
  const bool film = result.model == mc::Model::hln2d || result.model == mc::Model::hln2d_so;

  if (result.model == mc::Model::hln2d) {
    const double alpha = result.alpha.value_or(options.alpha_default);
    const double alpha_err = result.alpha_err.value_or(0.0);
    const bool alpha_half = std::fabs(alpha + 0.5) <= std::max(alpha_err, kAlphaNearHalf);
    const bool dip = antilocalization_dip(
        binned(points, result.field_window_t, conductance::point_noise_s(points)));
    if (alpha_half || dip) {
      ModelHint h;
      h.name = "spin-orbit";
      h.suggested = mc::Model::hln2d_so;
      h.chi2_red_fitted = chi2_red_against_noise(points, result, options);
      SweepFitOptions so = options;
      so.model = mc::Model::hln2d_so;
      so.alpha_fixed.reset();
      so.window_t = result.field_window_t;
      const SweepFitResult refit = fit_sweep(points, so);
      if (refit.ok) h.chi2_red_suggested = chi2_red_against_noise(points, refit, so);
      const std::string why =
          alpha_half ? fmt::format("alpha = {:.2f} +- {:.2f} is near -1/2", alpha, alpha_err)
                     : std::string("the conductance dips at low field (antilocalization)");
      h.message = fmt::format(
          "{}, typical of spin-orbit scattering: fit with hln2d-so (chi2_red against the "
          "noise {} with hln2d, {} with hln2d-so{})",
          why, chi2_text(h.chi2_red_fitted), chi2_text(h.chi2_red_suggested),
          refit.ok ? fmt::format(", L_phi = {:.3g} nm, L_so = {:.3g} nm", refit.lphi_m * 1e9,
                                 refit.lso_m.value_or(0.0) * 1e9)
                   : std::string());
      hints.push_back(std::move(h));
    }
  }
  if (film && geometry.width_m > 0.0 && result.lphi_m > geometry.width_m / kWidthFactor) {
    ModelHint h;
    h.name = "wire-width";
    h.suggested = mc::Model::wire1d;
    h.message = fmt::format(
        "L_phi = {:.3g} nm is more than 1/{:g} of the width {:.3g} nm: the film is becoming "
        "quasi-one-dimensional, fit with wire1d",
        result.lphi_m * 1e9, kWidthFactor, geometry.width_m * 1e9);
    hints.push_back(std::move(h));
  }
  if (film && geometry.thickness_m > 0.0 && result.lphi_m < geometry.thickness_m) {
    ModelHint h;
    h.name = "below-thickness";
    h.suggested = mc::Model::kawabata3d;
    h.message = fmt::format(
        "L_phi = {:.3g} nm is below the thickness {:.3g} nm: the film is three-dimensional for "
        "dephasing, fit with kawabata3d",
        result.lphi_m * 1e9, geometry.thickness_m * 1e9);
    hints.push_back(std::move(h));
  }
  return hints;
}

}  // namespace lphi::fit
