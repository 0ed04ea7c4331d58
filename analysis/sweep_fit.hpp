// Fitting one symmetrized magnetoconductance sweep.
//
// The model (magnetoconductance.hpp) is fitted to Delta sigma_sq(B) by
// Levenberg-Marquardt (Ceres' TinySolver over every residual of the sweep at
// once, on the normal equations, which for 1-4 parameters are cheap and well
// enough conditioned after Jacobi scaling) with analytic derivatives from the models' *_grad functions. Positive
// parameters (L_phi, L_so) are fitted as their logarithms; alpha, the
// optional offset, the optional classical background c*B^2 and the optional
// odd-in-B term k*|B| enter linearly.
//
// Odd-in-B term. A symmetrized sweep (both field signs, averaged) has no
// part odd in B: Hall pickup from misaligned contacts and a gain or
// temperature drift that is linear in time (hence in B along one leg) cancel.
// A one-sided sweep (0 to +B only) cannot be symmetrized, and those terms
// then look like a slope k*B that the even weak-localization curve would
// otherwise absorb into L_phi and alpha. fit_odd_term adds k*|B| (|B| = B on
// a one-sided sweep) as one more linear parameter, solved exactly by the
// start grid's variable projection, in the covariance like the others and
// reported as odd_s_per_t with its error; the result carries the flag
// odd_term_fitted so that the output says the model was extended
// (analysis/PHYSICS.md, "The odd-in-B term of one-sided sweeps").
// Residuals are in units of e^2/(pi h), or in units of the point errors when
// those are given, so that they are of order one (in siemens, ~1e-5, they
// would trip the solver's absolute gradient tolerance).
//
// Characteristic field B_c. The window rules below compare fields with the
// field at which the model leaves its low-field regime:
//   hln2d, kawabata3d: B_c = B_phi = hbar/(4 e L_phi^2);
//   hln2d_so:          B_c = max(B_phi, B_so), B_so = hbar/(4 e L_so^2);
//   wire1d:            B_c = sqrt(3) hbar/(e w L_phi), where L_B = L_phi
//                      (with spin-orbit the larger of that and the same for L_so).
//
// Field window. The fit uses |B| <= window. Unless overridden, the window is
// window_factor * B_c (B_c first from the start values, then from each fit,
// iterated until the window moves by less than 5%, at most 8 fits), capped at
// transport_cap * B_tr when the mean free path is known (B_tr = hbar/(2 e l^2)),
// for wire1d at hbar/(e w^2) (magnetic length equal to the width, the edge of
// the quasi-1D form's validity), and at the largest measured field. The first
// start-value search uses the whole capped range. The window always holds
// the 10 lowest fields when the data have them.
//
// Noise floor of the window (analysis/PHYSICS.md, "Noisy sweeps and the
// field window"). B_c from a noisy pass is uncertain, and a pass that
// happens to find a long L_phi would pull the window inward, where fewer
// points determine L_phi even less, down to the 10-point minimum. A move to
// a smaller window therefore goes only to window_factor times the upper
// 2-sigma bound of B_c, B_c exp(2 sd(ln B_c)), with sd(ln B_c) = 2 sd(ln L)
// (1 sd(ln L) for wire1d) of the length that sets B_c, from that pass's
// covariance; without point errors the covariance is scaled by the
// residual scatter, so the floor rises with the points' noise (a pass whose
// covariance is singular keeps its window). A precise fit (sd(ln L) = 1 %)
// moves to within 4 % of where it moved before; a noisy one keeps its points.
//
// alpha (hln2d) is fitted freely only when the window reaches at least
// alpha_free_min_ratio * B_phi; below that only the low-field curvature
// alpha L_phi^4 is determined, so alpha is held (alpha_default, 1 for weak
// localization) and the flag alpha_held is set. alpha is also held, and the
// whole window search repeated with it held, when a free alpha comes out
// unresolved: its error above 0.5 of its value (alpha not determined to a
// factor of 2), |corr(alpha, ln L_phi)| above 0.995 (alpha_lphi_degenerate
// below), or a singular covariance. Noisy sweeps are the usual case: the
// alpha-L_phi degeneracy turns the noise into a wandering L_phi, while the
// held alpha (the physical value) leaves L_phi determined. The held fit is
// kept only when the data do not reject it: on the held fit's window, alpha
// fitted freely must not lower chi-square by more than 9 point variances
// (the likelihood-ratio test of one parameter at 3 sigma); otherwise (an
// antilocalizing sample fitted with hln2d, whose alpha crosses zero) the
// first, free fit stands.
//
// Start values come from the data: a grid over ln L_phi (and ln L_so) whose
// characteristic fields run, by factors of 2, from half the mean field step to
// twice the window, with the linear parameters solved exactly at each grid
// point (variable projection, on at most 64 evenly chosen points); the best
// grid point, refined by a parabola through its neighbours, starts LM.
// Lengths are clamped so that B_c starts within [field step/100, 100 window]
// and flagged when they end outside it.
//
// Convergence: LM stops at the first iterate whose Gauss-Newton step left,
// delta = (J^T J)^-1 J^T r, is shorter than 1e-3 standard errors in the
// metric of the covariance below (sqrt(g^T delta), times sqrt((n - p)/chi2)
// when point errors are unknown), so the answer is that close to the
// minimum without a further trial step to confirm it; failing that, on the
// chi-square change, step size or gradient tolerances (termination says
// which).
//
// Errors are 1-sigma from the covariance (J^T J)^-1 formed from the analytic
// Jacobian at the solution; when point errors are not given, the covariance
// is scaled by the reduced chi-square. L_phi's error is L_phi times the error
// of ln L_phi. A held alpha has alpha_err = 0. chi2 is the sum of squared
// residuals (dimensionless with point errors, in (e^2/(pi h))^2 without);
// chi2_red = chi2 / (n - p).
//
// Quality flags and their thresholds:
//   window_too_narrow       window < 2 B_c: the sweep does not reach well
//                           past B_c, the length is not determined.
//   alpha_held              alpha held at alpha_default (see above: a short
//                           window, or a free alpha left unresolved).
//   alpha_lphi_degenerate   alpha free and |corr(alpha, ln L_phi)| > 0.995, or
//                           J^T J singular at the solution. The HLN form
//                           correlates the two strongly even in good sweeps
//                           (with an offset: 0.97 at a 20 B_phi window, 0.993
//                           at 5 B_phi, 0.998 at 2 B_phi), so 0.995 marks a
//                           window of about 4 B_phi or an equally poor sweep.
//   not_converged           the solver did not report convergence (iteration
//                           limit, or a chi-square that is not finite).
//   outside_diffusive       (l known) window > B_tr, or L_phi < l.
//   dimensionality_mismatch (geometry known) hln2d/hln2d_so: L_phi < t;
//                           wire1d: L_phi < w or L_phi < t; kawabata3d:
//                           L_phi > 2 t (slack because the crossover is gradual).
//   too_few_points          fewer than max(10, 3 p) points in the window,
//                           p the number of fitted parameters.
//   no_signal               the fitted model does not improve on the linear terms
//                           alone (offset, background, odd term: a flat sweep)
//                           beyond the noise: F-test of the chi-square reduction
//                           bought by the model's other parameters, p > 1e-3
//                           (F(p_model - p_linear, n - p_model), both chi-squares
//                           over the window's points; analysis/PHYSICS.md,
//                           "Flat sweeps"). A warm sample, an open contact or a
//                           sweep far narrower than B_phi. The result then has
//                           ok = false, an error naming F and p, lphi_m,
//                           lphi_err_m and b_phi_t NaN (the length is not
//                           quoted), and the other fields as fitted.
//   odd_term_fitted         the fit carried k*|B| (fit_odd_term): the sweep was
//                           not symmetrized and its odd part was fitted.
//   parameter_at_limit      a length's B_c fell below a quarter of the mean
//                           field step (the curve is then in its logarithmic
//                           regime everywhere, the length trades against the
//                           offset) or left [field step/100, 100 window].
//
// Bad input (empty, non-finite, negative errors, a wire without width, a 3D
// film without thickness, fewer points than parameters) gives ok = false and
// an error naming the problem; nothing is fitted.
// No I/O, no threads, deterministic.
#pragma once

#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "analysis/conductance.hpp"
#include "analysis/magnetoconductance.hpp"

namespace lphi::fit {

struct SampleGeometry {
  double squares = 0.0;           // L/W between the voltage probes (0 unknown)
  double width_m = 0.0;           // needed by wire1d; 0 unknown
  double thickness_m = 0.0;       // needed by kawabata3d; 0 unknown
  double mean_free_path_m = 0.0;  // 0 unknown
};

struct SweepFitOptions {
  mc::Model model = mc::Model::hln2d;
  SampleGeometry geometry;
  std::optional<double> alpha_fixed;  // hold alpha at this value (hln2d)
  double alpha_default = 1.0;         // used when alpha cannot be fitted freely
  bool fit_offset = true;             // constant offset in Delta sigma
  bool fit_background = false;        // classical c*B^2 term
  bool fit_odd_term = false;          // linear k*|B| term (one-sided sweeps; see above)
  bool wire_spin_orbit = false;       // wire1d: also fit L_so
  std::optional<double> window_t;     // override the automatic field window
  double window_factor = 20.0;        // window = window_factor * B_c
  double transport_cap = 0.3;         // window <= transport_cap * B_tr
  double alpha_free_min_ratio = 5.0;  // fit alpha only if window >= this * B_phi
  int max_iterations = 200;
};

enum class Flag {
  window_too_narrow,       // window below 2 B_c: L_phi poorly determined
  alpha_held,              // alpha not fitted freely (window too short)
  alpha_lphi_degenerate,   // |corr(alpha, ln L_phi)| > 0.995
  not_converged,           // the solver did not report convergence
  outside_diffusive,       // window beyond B_tr, or L_phi < mean free path
  dimensionality_mismatch, // fitted L_phi inconsistent with the model's geometry
  too_few_points,          // fewer points in the window than needed
  parameter_at_limit,      // a length ran to the edge of what the data resolve
  odd_term_fitted,         // the model carried the odd-in-B term k*|B|
  no_signal,               // no weak-localization signal above the noise (ok false)
};
std::string_view flag_name(Flag f);  // "window-too-narrow", ...

struct SweepFitResult {
  bool ok = false;     // false: the input could not be fitted, see error
  std::string error;   // what was wrong with the input (empty when ok)
  mc::Model model = mc::Model::hln2d;
  double lphi_m = 0.0, lphi_err_m = 0.0;
  std::optional<double> alpha, alpha_err;    // hln2d only
  std::optional<double> lso_m, lso_err_m;    // hln2d_so, wire1d with SO
  double offset_s = 0.0, offset_err_s = 0.0; // fitted offset (siemens)
  std::optional<double> background_s_per_t2, background_err_s_per_t2;
  std::optional<double> odd_s_per_t, odd_err_s_per_t;  // k of k*|B| when fitted
  double corr_alpha_lphi = 0.0;              // correlation(alpha, ln L_phi)
  double corr_lso_lphi = 0.0;
  double chi2 = 0.0, chi2_red = 0.0;         // sum of squared residuals (see top)
  std::size_t n_points = 0;                  // points inside the window
  double field_window_t = 0.0;
  double b_phi_t = 0.0;
  int iterations = 0;                        // LM iterations, all window passes
  bool converged = false;
  std::string termination;                   // the solver's termination reason
  std::vector<Flag> flags;
  bool has(Flag f) const;
};

// sigma_err_s: optional per-point standard errors (same length as points),
// empty when unknown.
SweepFitResult fit_sweep(std::span<const conductance::DeltaSigmaPoint> points,
                         const SweepFitOptions& options,
                         std::span<const double> sigma_err_s = {});

}  // namespace lphi::fit
