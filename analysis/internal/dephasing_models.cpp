// The L_phi(T) models' least-squares solves
// (analysis/internal/dephasing_models.hpp).
#include "analysis/internal/dephasing_models.hpp"

#include <ceres/ceres.h>

#include <Eigen/Dense>
#include <cmath>
#include <vector>

namespace lphi::dephasing::models {
namespace {

// r = (e^u + e^(w + p x) - y) / sigma, parameters (u, w, p):
// u = ln L_sat^-2, w = ln(b T_ref^p).
class SaturatingResidual final : public ceres::SizedCostFunction<1, 3> {
 public:
  SaturatingResidual(double x, double y, double sigma) : x_(x), y_(y), sigma_(sigma) {}
  bool Evaluate(double const* const* parameters, double* residuals,
                double** jacobians) const override {
    const double* q = parameters[0];
    const double sat = std::exp(q[0]);
    const double power = std::exp(q[1] + q[2] * x_);
    residuals[0] = (sat + power - y_) / sigma_;
    if (jacobians != nullptr && jacobians[0] != nullptr) {
      jacobians[0][0] = sat / sigma_;
      jacobians[0][1] = power / sigma_;
      jacobians[0][2] = x_ * power / sigma_;
    }
    return std::isfinite(residuals[0]);
  }

 private:
  double x_, y_, sigma_;
};

// r = (e^(w + p x) - y) / sigma, parameters (w, p).
class PowerLawResidual final : public ceres::SizedCostFunction<1, 2> {
 public:
  PowerLawResidual(double x, double y, double sigma) : x_(x), y_(y), sigma_(sigma) {}
  bool Evaluate(double const* const* parameters, double* residuals,
                double** jacobians) const override {
    const double* q = parameters[0];
    const double power = std::exp(q[0] + q[1] * x_);
    residuals[0] = (power - y_) / sigma_;
    if (jacobians != nullptr && jacobians[0] != nullptr) {
      jacobians[0][0] = power / sigma_;
      jacobians[0][1] = x_ * power / sigma_;
    }
    return std::isfinite(residuals[0]);
  }

 private:
  double x_, y_, sigma_;
};

ceres::Solver::Options solver_options(int max_iterations) {
  ceres::Solver::Options o;
  o.minimizer_type = ceres::TRUST_REGION;
  o.trust_region_strategy_type = ceres::LEVENBERG_MARQUARDT;
  o.linear_solver_type = ceres::DENSE_QR;
  o.max_num_iterations = max_iterations;
  o.function_tolerance = 1e-14;
  o.gradient_tolerance = 1e-14;
  o.parameter_tolerance = 1e-12;
  o.logging_type = ceres::SILENT;
  o.minimizer_progress_to_stdout = false;
  o.num_threads = 1;
  return o;
}

// (J^T J)^-1 by SVD of J; empty when J is rank deficient to working
// precision (a parameter the data do not determine).
Eigen::MatrixXd inverse_normal_matrix(const Eigen::MatrixXd& j) {
  Eigen::JacobiSVD<Eigen::MatrixXd> svd(j, Eigen::ComputeThinV);
  const auto& s = svd.singularValues();
  if (s.size() == 0 || !(s(s.size() - 1) > 1e-12 * s(0))) return {};
  const Eigen::VectorXd inv2 = s.array().square().inverse();
  return svd.matrixV() * inv2.asDiagonal() * svd.matrixV().transpose();
}

double chi2_of(const Data& d, const std::vector<double>& q, bool saturating) {
  double chi2 = 0.0;
  for (std::size_t i = 0; i < d.x.size(); ++i) {
    const double model = saturating ? std::exp(q[0]) + std::exp(q[1] + q[2] * d.x[i])
                                    : std::exp(q[0] + q[1] * d.x[i]);
    const double r = (model - d.y[i]) / d.sigma[i];
    chi2 += r * r;
  }
  return chi2;
}

Eigen::MatrixXd jacobian_of(const Data& d, const std::vector<double>& q, bool saturating) {
  const auto n = static_cast<Eigen::Index>(d.x.size());
  Eigen::MatrixXd j(n, saturating ? 3 : 2);
  for (Eigen::Index i = 0; i < n; ++i) {
    const auto k = static_cast<std::size_t>(i);
    if (saturating) {
      const double power = std::exp(q[1] + q[2] * d.x[k]);
      j(i, 0) = std::exp(q[0]) / d.sigma[k];
      j(i, 1) = power / d.sigma[k];
      j(i, 2) = d.x[k] * power / d.sigma[k];
    } else {
      const double power = std::exp(q[0] + q[1] * d.x[k]);
      j(i, 0) = power / d.sigma[k];
      j(i, 1) = d.x[k] * power / d.sigma[k];
    }
  }
  return j;
}

}  // namespace

Solution solve(const Data& d, std::vector<double> start, bool saturating, double u_floor,
               int max_iterations) {
  ceres::Problem problem;
  double* q = start.data();
  for (std::size_t i = 0; i < d.x.size(); ++i) {
    ceres::CostFunction* cost =
        saturating ? static_cast<ceres::CostFunction*>(
                         new SaturatingResidual(d.x[i], d.y[i], d.sigma[i]))
                   : new PowerLawResidual(d.x[i], d.y[i], d.sigma[i]);
    problem.AddResidualBlock(cost, nullptr, q);
  }
  const int p_index = saturating ? 2 : 1;
  problem.SetParameterLowerBound(q, p_index, kMinExponent);
  problem.SetParameterUpperBound(q, p_index, kMaxExponent);
  if (saturating) problem.SetParameterLowerBound(q, 0, u_floor);

  ceres::Solver::Summary summary;
  ceres::Solve(solver_options(max_iterations), &problem, &summary);

  Solution s;
  s.q = start;
  s.chi2 = chi2_of(d, s.q, saturating);
  s.converged = summary.termination_type == ceres::CONVERGENCE;
  s.cov = inverse_normal_matrix(jacobian_of(d, s.q, saturating));
  return s;
}

std::pair<double, double> log_log_line(const Data& d, const std::vector<std::size_t>& use) {
  double sw = 0, sx = 0, sy = 0, sxx = 0, sxy = 0;
  for (std::size_t i : use) {
    const double wt = std::pow(d.y[i] / d.sigma[i], 2);
    const double ly = std::log(d.y[i]);
    sw += wt;
    sx += wt * d.x[i];
    sy += wt * ly;
    sxx += wt * d.x[i] * d.x[i];
    sxy += wt * d.x[i] * ly;
  }
  const double det = sw * sxx - sx * sx;
  if (!(det > 0.0)) return {sy / sw, 0.0};
  const double p = (sw * sxy - sx * sy) / det;
  return {(sy - p * sx) / sw, p};
}

}  // namespace lphi::dephasing::models
