// The Levenberg-Marquardt solve of one sweep-fit pass, as a template over
// the number of parameters P (1-4). Included only by the translation units
// that instantiate it (analysis/sweep_fit_lm.cpp.in, one per P).
#pragma once

#include <ceres/tiny_solver.h>

#include <Eigen/Dense>
#include <algorithm>
#include <array>
#include <cmath>
#include <vector>

#include <fmt/format.h>

#include "analysis/internal/sweep_fit_function.hpp"

namespace lphi::fit::detail {

inline double sum_of_squares(const double* r, std::size_t n) {
  double sum = 0.0;
  for (std::size_t i = 0; i < n; ++i) sum += r[i] * r[i];
  return sum;
}

// The Gauss-Newton step left at an iterate, in standard errors: with J^T J
// and g = J^T r at the iterate, the step is delta = (J^T J)^-1 g and the
// chi-square it would remove is g^T delta (for a linear model exactly,
// near the minimum to second order). The covariance is (J^T J)^-1, times
// chi2/(n - p) when the point errors are unknown (analysis/sweep_fit.hpp), so
// the step's length in standard errors is sqrt(g^T delta) or
// sqrt(g^T delta (n - p)/chi2). Returns +infinity when J^T J is singular.
template <int P>
double gauss_newton_step_in_standard_errors(const double* residuals, const double* jacobian,
                                            std::size_t n, bool errors_known) {
  Eigen::Matrix<double, P, P> jtj = Eigen::Matrix<double, P, P>::Zero();
  Eigen::Matrix<double, P, 1> g = Eigen::Matrix<double, P, 1>::Zero();
  double chi2 = 0.0;
  std::array<const double*, P> column;
  for (std::size_t a = 0; a < P; ++a) column[a] = jacobian + a * n;
  std::array<double, P> g_sum{};
  std::array<double, P * (P + 1) / 2> jtj_sum{};  // lower triangle, row by row
  for (std::size_t i = 0; i < n; ++i) {
    const double r = residuals[i];
    chi2 += r * r;
    std::size_t t = 0;
    for (std::size_t a = 0; a < P; ++a) {
      const double ja = column[a][i];
      g_sum[a] += ja * r;
      for (std::size_t b = 0; b <= a; ++b) jtj_sum[t++] += ja * column[b][i];
    }
  }
  std::size_t t = 0;
  for (int a = 0; a < P; ++a) {
    g[a] = g_sum[static_cast<std::size_t>(a)];
    for (int b = 0; b <= a; ++b) jtj(a, b) = jtj(b, a) = jtj_sum[t++];
  }
  const double dof = static_cast<double>(n) - P;
  if (!(dof > 0.0)) return kInf;
  // Jacobi scaling keeps the factorization well conditioned; the quadratic
  // form is invariant under it.
  const Eigen::Matrix<double, P, 1> scale = jtj.diagonal().cwiseSqrt().cwiseInverse();
  if (!scale.allFinite()) return kInf;
  const Eigen::Matrix<double, P, P> normalized = scale.asDiagonal() * jtj * scale.asDiagonal();
  const Eigen::LLT<Eigen::Matrix<double, P, P>> llt(normalized);
  if (llt.info() != Eigen::Success) return kInf;
  const Eigen::Matrix<double, P, 1> scaled_g = scale.cwiseProduct(g);
  const double removed = scaled_g.dot(llt.solve(scaled_g));
  const double variance_scale = errors_known ? 1.0 : chi2 / dof;
  const double steps2 = removed / variance_scale;
  return std::isfinite(steps2) && steps2 >= 0.0 ? std::sqrt(steps2) : kInf;
}

// LM stops at an iterate whose Gauss-Newton step left is below this many
// standard errors: the answer is then that close to the minimum, and the
// trial step that would confirm it (one more model pass) is not taken. The
// GSL cross-check asks for agreement to 0.01 standard errors.
constexpr double kGaussNewtonStepTolerance = 1e-3;

// The sweep as a ceres::TinySolver function with P parameters (fixed at
// compile time, so the normal equations are small fixed-size products) and
// one residual per point.
//
// TinySolver evaluates the Jacobian at each new iterate and then compares
// the gradient with options.gradient_tolerance. The function sees that
// Jacobian first: when the Gauss-Newton step left there is below
// kGaussNewtonStepTolerance, it raises the solver's gradient tolerance to
// infinity so that the solver stops at that iterate (GRADIENT_TOO_SMALL),
// and records that it did so.
template <int P>
class SweepResiduals {
 public:
  using Scalar = double;
  enum { NUM_RESIDUALS = Eigen::Dynamic, NUM_PARAMETERS = P };

  SweepResiduals(Evaluations& evaluations, bool errors_known, double* solver_gradient_tolerance)
      : evaluations_(evaluations), errors_known_(errors_known),
        solver_gradient_tolerance_(solver_gradient_tolerance) {}
  int NumResiduals() const { return static_cast<int>(evaluations_.size()); }
  bool operator()(const double* theta, double* residuals, double* jacobian) const {
    const std::size_t n = evaluations_.size();
    const Evaluations::Slot& e = evaluations_.at(theta, jacobian != nullptr);
    std::copy(e.residuals.get(), e.residuals.get() + n, residuals);
    if (jacobian != nullptr) {
      std::copy(e.jacobian.get(), e.jacobian.get() + n * P, jacobian);
      if (gauss_newton_step_in_standard_errors<P>(e.residuals.get(), e.jacobian.get(), n,
                                                  errors_known_) < kGaussNewtonStepTolerance) {
        *solver_gradient_tolerance_ = kInf;
        stopped_ = true;
      }
    }
    return true;
  }
  bool stopped_at_gauss_newton_tolerance() const { return stopped_; }

 private:
  Evaluations& evaluations_;
  bool errors_known_;
  double* solver_gradient_tolerance_;
  mutable bool stopped_ = false;
};

// Convergence, besides the Gauss-Newton step test above (which normally
// ends the solve first), as in Ceres' defaults for a small problem: the
// chi-square changes by less than kFunctionTolerance of itself, or the step
// is below kParameterTolerance relative, or the (Jacobi-scaled) gradient's
// largest entry is below kGradientTolerance. Residuals are of order one (see
// analysis/sweep_fit.hpp), so the cost is ~n/2 in units of the noise; a
// chi-square change ~1e-7 n means the step before the last was ~0.01
// standard errors for n <= 1e4, and Gauss-Newton steps near the minimum
// shrink quadratically, so the solution sits far closer than that to the
// minimum.
constexpr double kFunctionTolerance = 1e-7;
constexpr double kParameterTolerance = 1e-8;
constexpr double kGradientTolerance = 1e-10;
// TinySolver's function tolerance is absolute (in chi-square); it is set
// from the chi-square at the start of a solve, and the solve is resumed with
// a tighter one while the chi-square fell by more than this factor.
constexpr double kToleranceRefresh = 0.5;

template <int P>
PassResult tiny_solve(Evaluations& evaluations, bool errors_known, int max_iterations,
                      std::vector<double>& theta, std::vector<double>& residuals,
                      std::vector<double>& jacobian) {
  using Solver = ceres::TinySolver<SweepResiduals<P>>;
  Solver solver;
  const SweepResiduals<P> function(evaluations, errors_known, &solver.options.gradient_tolerance);
  solver.options.parameter_tolerance = kParameterTolerance;
  typename Solver::Parameters x = Eigen::Map<const Eigen::Matrix<double, P, 1>>(theta.data());

  PassResult r;
  const std::size_t n = evaluations.size();
  double chi2_scale = sum_of_squares(evaluations.at(x.data(), true).residuals.get(), n);
  int left = max_iterations;
  typename Solver::Status status = Solver::HIT_MAX_ITERATIONS;
  double chi2 = chi2_scale;
  while (left > 0) {
    solver.options.gradient_tolerance = kGradientTolerance;
    solver.options.function_tolerance = kFunctionTolerance * chi2_scale;
    // TinySolver tries at most max_num_iterations - 1 steps.
    solver.options.max_num_iterations = left + 1;
    const typename Solver::Summary& summary = solver.Solve(function, &x);
    status = summary.status;
    const int steps = std::min(summary.iterations, left);
    r.iterations += steps;
    left -= steps;
    chi2 = 2.0 * summary.final_cost;
    if (status != Solver::COST_CHANGE_TOO_SMALL || !(chi2 < kToleranceRefresh * chi2_scale) ||
        steps == 0)
      break;
    chi2_scale = chi2;
  }
  std::copy(x.data(), x.data() + P, theta.begin());
  const Evaluations::Slot& at_solution = evaluations.at(theta.data(), true);
  residuals.assign(at_solution.residuals.get(), at_solution.residuals.get() + n);
  jacobian.assign(at_solution.jacobian.get(), at_solution.jacobian.get() + n * P);
  chi2 = sum_of_squares(residuals.data(), n);

  r.converged = std::isfinite(chi2);
  switch (status) {
    case Solver::COST_CHANGE_TOO_SMALL:
      r.termination =
          fmt::format("function tolerance reached: |chi2 change| < {:.0e} of chi2 {:.6g}",
                      kFunctionTolerance, chi2);
      break;
    case Solver::RELATIVE_STEP_SIZE_TOO_SMALL:
      r.termination =
          fmt::format("parameter tolerance reached: |step| < {:.0e} |x|", kParameterTolerance);
      break;
    case Solver::GRADIENT_TOO_SMALL:
      if (function.stopped_at_gauss_newton_tolerance())
        r.termination = fmt::format("Gauss-Newton step left below {:.0e} standard errors",
                                    kGaussNewtonStepTolerance);
      else
        r.termination = fmt::format("gradient tolerance reached: max |scaled gradient| < {:.0e}",
                                    kGradientTolerance);
      break;
    case Solver::COST_TOO_SMALL:
      r.termination = fmt::format("chi2 {:.3g} is zero to double precision", chi2);
      break;
    case Solver::HIT_MAX_ITERATIONS:
    default:
      r.converged = false;
      r.termination = fmt::format("maximum number of iterations ({}) reached", max_iterations);
      break;
  }
  if (!std::isfinite(chi2)) r.termination = "chi2 is not finite";
  return r;
}

}  // namespace lphi::fit::detail
