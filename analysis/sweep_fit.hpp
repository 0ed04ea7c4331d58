// Fitting one symmetrized magnetoconductance sweep.
//
// The model (magnetoconductance.hpp) is fitted to Delta sigma_sq(B) by
// Levenberg-Marquardt (Ceres) with analytic derivatives. Positive parameters
// (L_phi, L_so) are fitted as their logarithms; alpha, the optional offset and
// the optional classical background c*B^2 enter linearly. Residuals are in
// units of e^2/(pi h) so that they are of order one (in siemens, ~1e-5, they
// would trip Ceres' absolute gradient tolerance).
//
// Field window. The fit uses |B| <= window. Unless overridden, the window is
// window_factor * B_phi (B_phi from the current estimate, iterated until it
// settles), capped at transport_cap * B_tr when the mean free path is known
// (B_tr = hbar/(2 e l^2)) and at the largest measured field.
//
// alpha is fitted freely only when the window reaches at least
// alpha_free_min_ratio * B_phi; below that only the low-field curvature
// alpha L_phi^4 is determined, so alpha is held (alpha_default, 1 for weak
// localization) and the flag alpha_held is set.
//
// Start values come from the data: a grid over ln L_phi (and ln L_so) spanning
// the fields the sweep resolves, with the linear parameters solved exactly at
// each grid point (variable projection); the best grid point starts LM.
//
// Errors are 1-sigma from the covariance at the solution; when point errors
// are not given, the covariance is scaled by the reduced chi-square.
// No I/O, no threads, deterministic.
#pragma once

#include <optional>
#include <span>
#include <string>
#include <vector>

#include "conductance.hpp"
#include "magnetoconductance.hpp"

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
  bool wire_spin_orbit = false;       // wire1d: also fit L_so
  std::optional<double> window_t;     // override the automatic field window
  double window_factor = 20.0;        // window = window_factor * B_phi
  double transport_cap = 0.3;         // window <= transport_cap * B_tr
  double alpha_free_min_ratio = 5.0;  // fit alpha only if window >= this * B_phi
  int max_iterations = 200;
};

enum class Flag {
  window_too_narrow,       // window below ~2 B_phi: L_phi poorly determined
  alpha_held,              // alpha not fitted freely (window too short)
  alpha_lphi_degenerate,   // |corr(alpha, L_phi)| > 0.95
  not_converged,           // Ceres did not report convergence
  outside_diffusive,       // window beyond B_tr, or L_phi < mean free path
  dimensionality_mismatch, // fitted L_phi inconsistent with the model's geometry
  too_few_points,          // fewer points in the window than needed
  parameter_at_limit,      // a length ran to the edge of what the data resolve
};
std::string_view flag_name(Flag f);  // "window-too-narrow", ...

struct SweepFitResult {
  mc::Model model = mc::Model::hln2d;
  double lphi_m = 0.0, lphi_err_m = 0.0;
  std::optional<double> alpha, alpha_err;    // hln2d only
  std::optional<double> lso_m, lso_err_m;    // hln2d_so, wire1d with SO
  double offset_s = 0.0, offset_err_s = 0.0; // fitted offset (siemens)
  std::optional<double> background_s_per_t2, background_err_s_per_t2;
  double corr_alpha_lphi = 0.0;              // correlation(alpha, ln L_phi)
  double corr_lso_lphi = 0.0;
  double chi2 = 0.0, chi2_red = 0.0;
  std::size_t n_points = 0;                  // points inside the window
  double field_window_t = 0.0;
  double b_phi_t = 0.0;
  int iterations = 0;
  bool converged = false;
  std::string termination;                   // Ceres' termination reason
  std::vector<Flag> flags;
  bool has(Flag f) const;
};

// sigma_err_s: optional per-point standard errors (same length as points),
// empty when unknown.
SweepFitResult fit_sweep(std::span<const conductance::DeltaSigmaPoint> points,
                         const SweepFitOptions& options,
                         std::span<const double> sigma_err_s = {});

}  // namespace lphi::fit
