// The two models of the L_phi(T) fit (analysis/dephasing.hpp) as weighted
// least-squares problems, and their Levenberg-Marquardt solves (Ceres,
// analytic derivatives):
//   saturating   y = e^u + e^(w + p x)   parameters (u, w, p)
//   power law    y = e^(w + p x)         parameters (w, p)
// with y = L_phi^-2, x = ln(T/T_ref), u = ln L_sat^-2, w = ln(b T_ref^p).
// Internal to analysis/.
#pragma once

#include <Eigen/Dense>
#include <cstddef>
#include <utility>
#include <vector>

namespace lphi::dephasing::models {

// Loose bounds on the exponent: the physical range is about 0.5 to 4; the
// bounds only keep a hopeless fit from running away.
inline constexpr double kMinExponent = 0.01;
inline constexpr double kMaxExponent = 10.0;

// The data of one fit, in the form the residuals use.
struct Data {
  std::vector<double> x;      // ln(T / T_ref)
  std::vector<double> y;      // L_phi^-2, m^-2
  std::vector<double> sigma;  // error of y, m^-2
  double ln_t_ref = 0.0;
};

struct Solution {
  std::vector<double> q;  // fitted parameters
  double chi2 = 0.0;
  bool converged = false;
  Eigen::MatrixXd cov;  // unscaled (J^T J)^-1; empty if singular
};

// One solve from `start`, the exponent bounded to [kMinExponent,
// kMaxExponent] and, for the saturating model, u to u >= u_floor.
Solution solve(const Data& d, std::vector<double> start, bool saturating, double u_floor,
               int max_iterations);

// Weighted straight line ln y = w + p x over the selected points, weights
// (y/sigma)^2 (the error of ln y is sigma/y). Returns {w, p}.
std::pair<double, double> log_log_line(const Data& d, const std::vector<std::size_t>& use);

}  // namespace lphi::dephasing::models
