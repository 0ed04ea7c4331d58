// The curve a sweep fit found, its reduced chi-square against the points'
// own noise, the runs test on its residual signs, and the judgement of the
// fit's quality that weights it in L_phi(T). Pure functions, no I/O, no
// state: safe from any thread.
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

#include <cstddef>
#include <optional>
#include <span>
#include <string>

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

// The Wald-Wolfowitz runs test on a sequence of signs (A. Wald and
// J. Wolfowitz, Ann. Math. Statist. 11, 147 (1940); the exact distribution
// of the number of runs from F. S. Swed and C. Eisenhart, Ann. Math.
// Statist. 14, 66 (1943)). With n1 positive and n2 negative entries (zeros
// are left out) and R runs of equal sign, R has mean
//   mu = 2 n1 n2 / (n1 + n2) + 1,  variance (mu - 1)(mu - 2)/(n1 + n2 - 1)
// when the order is random. Residuals of a model that misses the curve come
// in long runs of one sign, so the test is one-sided: p = P(R <= R_observed).
// Exact (the Swed-Eisenhart sum) when n1 + n2 <= kRunsExactMax, otherwise
// the normal approximation with a continuity correction, z = (R + 1/2 - mu)
// / sd (common practice; at n1 + n2 > 200 its error in p is far below the
// thresholds it is compared with).
struct RunsTest {
  std::size_t n_positive = 0, n_negative = 0;
  std::size_t runs = 0;
  double expected_runs = 0.0;  // mu above
  double p_value = 1.0;        // P(R <= runs); 1 when either sign is absent
};
inline constexpr std::size_t kRunsExactMax = 200;
RunsTest runs_test(std::span<const double> values);

// The verdict on one fit's quality against the sweep's own noise, for
// weighting it in L_phi(T) (analysis/PHYSICS.md, "A fit's weight and its
// residuals").
//   chi2_red      chi2_red_against_noise over the fit window (empty when it
//                 cannot be formed; the fit is then judged on the runs test
//                 alone and error_scale is 1).
//   runs_p        the runs test on the signs of the window's residuals in
//                 field order, taken over block means: a lock-in time
//                 constant or a field reading shared by neighbouring points
//                 correlates their noise, which alone shortens the runs. The
//                 block length is the AR(1) integrated correlation time of
//                 the residuals, (1 + rho1)/(1 - rho1) with rho1 their lag-1
//                 autocorrelation (1 for white noise), rounded up and capped
//                 so that at least kRunsMinBlocks blocks remain; a misfit
//                 spans many blocks (it varies on the scale of B_phi), so the
//                 blocks keep it visible.
//   error_scale   sqrt(max(1, chi2_red)): the factor the fit's errors are
//                 multiplied by before they enter L_phi(T) (the Birge ratio,
//                 common practice when the scatter exceeds the errors).
//   unusable      chi2_red > kChi2RedUnusable (the residuals are more than
//                 ~3.2 times the noise: the model does not describe the
//                 sweep, and scaling its errors would not make L_phi right),
//                 or runs_p < kRunsPUnusable (the residuals have structure
//                 that noise gives less than once in a million sweeps; chosen
//                 so small because hundreds of sweeps are judged per cooldown
//                 and a false rejection loses a good point), or the fit
//                 failed (ok false).
//   reason        one sentence with the numbers when unusable, else empty.
inline constexpr double kChi2RedUnusable = 10.0;
inline constexpr double kRunsPUnusable = 1e-6;
inline constexpr std::size_t kRunsMinBlocks = 40;
struct FitQuality {
  std::optional<double> chi2_red;
  double runs_p = 1.0;
  std::size_t runs_block = 1;  // points per block in the runs test
  double error_scale = 1.0;
  bool unusable = false;
  std::string reason;
};
FitQuality judge_quality(std::span<const conductance::DeltaSigmaPoint> points,
                         const SweepFitResult& result, const SweepFitOptions& options,
                         std::size_t half_width = 15);

}  // namespace lphi::fit
