// The curve a sweep fit found, and its reduced chi-square against the
// points' own noise.
//
// fit_sweep (sweep_fit.hpp) fits without point errors, so its chi2_red is a
// residual variance in (e^2/(pi h))^2 and says nothing by itself about
// whether the model describes the sweep. Judged against the noise of the
// points,
//   chi2_red = sum_i (r_i / s_i)^2 / (n - p)
// over the n points inside the fit window, with r_i the residual of the
// fitted curve, s_i the point's noise and p the number of fitted
// parameters, it is about 1 when the model describes the sweep and grows
// when it does not (a wrong model, an unfitted background, a drifting
// sample).
//
// s_i is estimated point by point (conductance::point_noise_profile_s) from
// the residuals r_i rather than from the points themselves: the difference
// residuals of a smooth curve still carry its curvature times the spacing
// squared, which near the weak-localization cusp is not small against the
// noise; the residuals have that curvature removed, and a smooth misfit
// left in them is again removed to second order by the differences, so the
// noise does not absorb the misfit that chi2_red is meant to show. The
// noise is local because the field reading's own noise turns into a
// conductance error (d sigma/dB) dB, largest near zero field where the
// curve is steepest.
#pragma once

#include <optional>
#include <span>

#include "analysis/conductance.hpp"
#include "analysis/sweep_fit.hpp"

namespace lphi::fit {

// The number of parameters the fit adjusted: the lengths (L_phi, and L_so
// where the model has it), alpha when it was fitted freely, the offset and
// the background when the options fitted them.
int fitted_parameter_count(const SweepFitResult& result, const SweepFitOptions& options);

// Delta sigma of the fitted curve at field_t, in siemens: the model at the
// fitted lengths and alpha, plus the fitted offset and background. NaN when
// the fit failed.
double fitted_delta_sigma_s(const SweepFitResult& result, const SweepFitOptions& options,
                            double field_t);

// chi2_red as above, for the points with |B| <= result.field_window_t, with
// the noise profile's half_width (conductance::point_noise_profile_s). Empty
// when the fit failed, a point in the window has no positive finite noise,
// or the window leaves no degree of freedom.
std::optional<double> chi2_red_against_noise(std::span<const conductance::DeltaSigmaPoint> points,
                                             const SweepFitResult& result,
                                             const SweepFitOptions& options,
                                             std::size_t half_width = 15);

}  // namespace lphi::fit
