// Zero-field thermometry: pure logarithm against logarithm with a floor.
// The models, the estimator and the test are described in thermometry.hpp.
#include "analysis/thermometry.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

#include <Eigen/Dense>
#include <ceres/ceres.h>

#include "analysis/constants.hpp"
#include "analysis/internal/table_checks.hpp"
#include "analysis/dephasing.hpp"

namespace lphi::thermometry {

namespace {

// T_floor bounds relative to the measured range (header).
constexpr double kFloorBelowMin = 1e-3;
constexpr double kFloorAboveMax = 10.0;
constexpr std::size_t kGridSteps = 64;

// Data in units of e^2/(pi h).
struct Data {
  std::vector<double> t;      // K
  std::vector<double> s;      // sigma / (e^2/(pi h))
  std::vector<double> sigma;  // error of s
};

// Effective log: (1/2) ln(T^2 + T_f^2), and its derivative in ln T_f.
double floor_log(double t, double tf) { return 0.5 * std::log(t * t + tf * tf); }
double floor_log_dlntf(double t, double tf) { return tf * tf / (t * t + tf * tf); }

// r = (sigma_1 + kappa (1/2) ln(T^2 + T_f^2) - s) / err, parameters
// (sigma_1, kappa, ln T_f).
class FloorResidual final : public ceres::SizedCostFunction<1, 3> {
 public:
  FloorResidual(double t, double s, double err) : t_(t), s_(s), err_(err) {}
  bool Evaluate(double const* const* parameters, double* residuals,
                double** jacobians) const override {
    const double* q = parameters[0];
    const double tf = std::exp(q[2]);
    const double l = floor_log(t_, tf);
    residuals[0] = (q[0] + q[1] * l - s_) / err_;
    if (jacobians != nullptr && jacobians[0] != nullptr) {
      jacobians[0][0] = 1.0 / err_;
      jacobians[0][1] = l / err_;
      jacobians[0][2] = q[1] * floor_log_dlntf(t_, tf) / err_;
    }
    return std::isfinite(residuals[0]);
  }

 private:
  double t_, s_, err_;
};

struct LinearFit {
  double sigma_1 = 0.0, kappa = 0.0, chi2 = 0.0;
  Eigen::Matrix2d cov = Eigen::Matrix2d::Zero();
  bool ok = false;
};

// Weighted straight line s = sigma_1 + kappa * l_i.
LinearFit line_fit(const Data& d, const std::vector<double>& l) {
  Eigen::Matrix2d a = Eigen::Matrix2d::Zero();
  Eigen::Vector2d rhs = Eigen::Vector2d::Zero();
  for (std::size_t i = 0; i < d.t.size(); ++i) {
    const double w = 1.0 / (d.sigma[i] * d.sigma[i]);
    a(0, 0) += w;
    a(0, 1) += w * l[i];
    a(1, 1) += w * l[i] * l[i];
    rhs(0) += w * d.s[i];
    rhs(1) += w * l[i] * d.s[i];
  }
  a(1, 0) = a(0, 1);
  LinearFit f;
  const double det = a.determinant();
  if (!(det > 1e-14 * a(0, 0) * a(1, 1))) return f;
  f.cov = a.inverse();
  const Eigen::Vector2d q = f.cov * rhs;
  f.sigma_1 = q(0);
  f.kappa = q(1);
  for (std::size_t i = 0; i < d.t.size(); ++i)
    f.chi2 += std::pow((f.sigma_1 + f.kappa * l[i] - d.s[i]) / d.sigma[i], 2);
  f.ok = true;
  return f;
}

std::vector<double> floor_logs(const Data& d, double tf) {
  std::vector<double> l(d.t.size());
  for (std::size_t i = 0; i < d.t.size(); ++i) l[i] = floor_log(d.t[i], tf);
  return l;
}

std::string validate(std::span<const ZeroFieldPoint> points, const ThermometryOptions& o) {
  if (auto e = detail::check_table_options(o.min_points, o.min_span_ratio, o.significance, o.max_iterations);
      !e.empty())
    return e;
  std::size_t with_error = 0;
  for (std::size_t i = 0; i < points.size(); ++i) {
    const auto& pt = points[i];
    if (auto e = detail::check_table_point(i, pt.temperature_k, "sigma_s", pt.sigma_s, false, "sigma_err_s",
                                           pt.sigma_err_s);
        !e.empty())
      return e;
    if (pt.sigma_err_s > 0.0) ++with_error;
  }
  return detail::check_errors_all_or_none(with_error, points.size(), "sigma_err_s");
}

}  // namespace

ThermometryResult analyse_zero_field(std::span<const ZeroFieldPoint> points,
                                     const ThermometryOptions& options) {
  ThermometryResult r;
  r.n_points = points.size();
  r.error = validate(points, options);
  if (!r.error.empty()) return r;

  std::vector<double> temps;
  for (const auto& pt : points) temps.push_back(pt.temperature_k);
  std::sort(temps.begin(), temps.end());
  temps.erase(std::unique(temps.begin(), temps.end()), temps.end());
  r.n_temperatures = temps.size();
  if (temps.size() < options.min_points || temps.back() / temps.front() < options.min_span_ratio)
    return r;
  r.sufficient = true;

  const double unit = lphi::si::wl_conductance_s;
  const std::size_t n = points.size();
  r.errors_from_scatter = points[0].sigma_err_s == 0.0;
  Data d;
  for (std::size_t i = 0; i < n; ++i) {
    const auto& pt = points[i];
    const double err = r.errors_from_scatter ? 1.0 : pt.sigma_err_s / unit;
    if (!(err > 0.0 && std::isfinite(1.0 / (err * err)))) {
      r.error = detail::point_error(i, "sigma_err_s out of the representable range");
      r.sufficient = false;
      return r;
    }
    d.t.push_back(pt.temperature_k);
    d.s.push_back(pt.sigma_s / unit);
    d.sigma.push_back(err);
  }
  auto scale_for = [&](double chi2, std::size_t k) {
    return r.errors_from_scatter ? chi2 / static_cast<double>(n - k) : 1.0;
  };

  // Log model.
  std::vector<double> ln_t(n);
  for (std::size_t i = 0; i < n; ++i) ln_t[i] = std::log(d.t[i]);
  const LinearFit lin = line_fit(d, ln_t);
  if (!lin.ok) {
    r.error = "the temperatures do not determine a slope";
    r.sufficient = false;
    return r;
  }
  r.chi2_log = lin.chi2;
  r.slope_kappa = lin.kappa;
  r.slope_kappa_err = std::sqrt(lin.cov(1, 1) * scale_for(lin.chi2, 2));
  r.sigma_1_s = lin.sigma_1 * unit;

  // Floor model: grid start over ln T_f, then Levenberg-Marquardt.
  const double lo = std::log(kFloorBelowMin * temps.front());
  const double hi = std::log(kFloorAboveMax * temps.back());
  double best_chi2 = std::numeric_limits<double>::infinity();
  double q[3] = {lin.sigma_1, lin.kappa, lo};
  for (std::size_t k = 0; k <= kGridSteps; ++k) {
    const double ln_tf = lo + (hi - lo) * static_cast<double>(k) / static_cast<double>(kGridSteps);
    const LinearFit g = line_fit(d, floor_logs(d, std::exp(ln_tf)));
    if (g.ok && g.chi2 < best_chi2) {
      best_chi2 = g.chi2;
      q[0] = g.sigma_1;
      q[1] = g.kappa;
      q[2] = ln_tf;
    }
  }
  ceres::Problem problem;
  for (std::size_t i = 0; i < n; ++i)
    problem.AddResidualBlock(new FloorResidual(d.t[i], d.s[i], d.sigma[i]), nullptr, q);
  problem.SetParameterLowerBound(q, 2, lo);
  problem.SetParameterUpperBound(q, 2, hi);
  ceres::Solver::Options so;
  so.trust_region_strategy_type = ceres::LEVENBERG_MARQUARDT;
  so.linear_solver_type = ceres::DENSE_QR;
  so.max_num_iterations = options.max_iterations;
  so.function_tolerance = 1e-14;
  so.gradient_tolerance = 1e-14;
  so.parameter_tolerance = 1e-12;
  so.logging_type = ceres::SILENT;
  so.num_threads = 1;
  ceres::Solver::Summary summary;
  ceres::Solve(so, &problem, &summary);
  r.converged = summary.termination_type == ceres::CONVERGENCE;

  const double tf = std::exp(q[2]);
  double chi2_floor = 0.0;
  Eigen::MatrixXd j(static_cast<Eigen::Index>(n), 3);
  for (std::size_t i = 0; i < n; ++i) {
    const double l = floor_log(d.t[i], tf);
    chi2_floor += std::pow((q[0] + q[1] * l - d.s[i]) / d.sigma[i], 2);
    const auto row = static_cast<Eigen::Index>(i);
    j(row, 0) = 1.0 / d.sigma[i];
    j(row, 1) = l / d.sigma[i];
    j(row, 2) = q[1] * floor_log_dlntf(d.t[i], tf) / d.sigma[i];
  }
  r.floor_at_boundary = q[2] < lo + std::log(1.01) || !(chi2_floor < lin.chi2);
  r.chi2_floor = r.floor_at_boundary ? std::min(chi2_floor, lin.chi2) : chi2_floor;
  if (r.floor_at_boundary) return r;

  double mean = 0.0, sw = 0.0;
  for (std::size_t i = 0; i < n; ++i) {
    mean += d.s[i] / (d.sigma[i] * d.sigma[i]);
    sw += 1.0 / (d.sigma[i] * d.sigma[i]);
  }
  mean /= sw;
  double tss = 0.0;
  for (std::size_t i = 0; i < n; ++i) tss += std::pow((d.s[i] - mean) / d.sigma[i], 2);
  const auto ft = lphi::dephasing::nested_f_test(lin.chi2, chi2_floor, n, 3, 1, tss);
  r.f_statistic = ft.f_statistic;
  r.p_value = ft.p_value;
  r.departs = ft.p_value < options.significance;
  if (!r.departs) return r;
  if (q[2] > hi - std::log(1.01)) {
    // sigma is flat over the whole range: the electrons never cooled along the
    // ln T line here, and the floor lies above the data by an amount the data
    // do not fix.
    r.notes.push_back("sigma flat over the whole range: floor above the measured temperatures");
    return r;
  }

  Eigen::JacobiSVD<Eigen::MatrixXd> svd(j, Eigen::ComputeThinV);
  const auto& sv = svd.singularValues();
  r.slope_kappa = q[1];
  r.sigma_1_s = q[0] * unit;
  r.floor_temperature_k = tf;
  if (sv(2) > 1e-12 * sv(0)) {
    const Eigen::Vector3d inv2 = sv.array().square().inverse();
    const Eigen::Matrix3d cov = svd.matrixV() * inv2.asDiagonal() * svd.matrixV().transpose() *
                                scale_for(chi2_floor, 3);
    r.slope_kappa_err = std::sqrt(cov(1, 1));
    r.floor_temperature_err_k = tf * std::sqrt(cov(2, 2));
  } else {
    // The floor model's parameters are not all determined: no error to give.
    r.slope_kappa_err = std::numeric_limits<double>::quiet_NaN();
  }
  return r;
}

}  // namespace lphi::thermometry
