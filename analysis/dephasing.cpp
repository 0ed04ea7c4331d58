// L_phi(T): power law with and without saturation, and the verdict.
// The estimator, the boundary rule, the F-test and the states are described
// in dephasing.hpp; this file follows that description step by step.
#include "analysis/dephasing.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>

#include <Eigen/Dense>
#include <boost/math/distributions/fisher_f.hpp>
#include <ceres/ceres.h>

#include "analysis/constants.hpp"
#include "analysis/internal/table_checks.hpp"

namespace lphi::dephasing {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// Loose bounds on the exponent: the physical range is about 0.5 to 4; the
// bounds only keep a hopeless fit from running away.
constexpr double kMinExponent = 0.01;
constexpr double kMaxExponent = 10.0;

// ln(L_sat^-2) may not go below ln(kSatFloor * min y) (see the header); a
// saturation term below kSatNegligible * min y changes no model value by more
// than a part in a million and is treated as zero.
constexpr double kSatFloor = 1e-8;
constexpr double kSatNegligible = 1e-6;

// Improvements in chi-square below this fraction of the total weighted sum of
// squares are rounding, not signal.
constexpr double kChi2Resolution = 1e-10;

// The data of one fit, in the form the residuals use.
struct Data {
  std::vector<double> x;      // ln(T / T_ref)
  std::vector<double> y;      // L_phi^-2, m^-2
  std::vector<double> sigma;  // error of y, m^-2
  double ln_t_ref = 0.0;
};

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

struct Solution {
  std::vector<double> q;  // fitted parameters
  double chi2 = 0.0;
  bool converged = false;
  Eigen::MatrixXd cov;  // unscaled (J^T J)^-1; empty if singular
};

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

// Weighted straight line ln y = w + p x over the selected points, weights
// (y/sigma)^2 (the error of ln y is sigma/y). Returns {w, p}.
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

std::string validate(std::span<const LphiPoint> points, const DephasingOptions& o) {
  if (o.dimension < 1 || o.dimension > 3) return "options.dimension must be 1, 2 or 3";
  if (auto e = detail::check_table_options(o.min_points, o.min_span_ratio, o.significance, o.max_iterations);
      !e.empty())
    return e;
  if (!(o.saturated_ratio > 0.0) || !std::isfinite(o.saturated_ratio))
    return "options.saturated_ratio must be a finite number > 0";
  std::size_t with_error = 0;
  for (std::size_t i = 0; i < points.size(); ++i) {
    const auto& pt = points[i];
    if (auto e = detail::check_table_point(i, pt.temperature_k, "lphi_m", pt.lphi_m, true, "lphi_err_m",
                                           pt.lphi_err_m);
        !e.empty())
      return e;
    if (pt.lphi_err_m > 0.0) ++with_error;
  }
  return detail::check_errors_all_or_none(with_error, points.size(), "lphi_err_m");
}

double aic(double chi2, std::size_t n, std::size_t k, bool from_scatter) {
  const double kk = static_cast<double>(k);
  if (!from_scatter) return chi2 + 2.0 * kk;
  const double nn = static_cast<double>(n);
  return nn * std::log(std::max(chi2, std::numeric_limits<double>::min()) / nn) + 2.0 * kk;
}

}  // namespace

std::string_view state_name(State s) {
  switch (s) {
    case State::insufficient_data: return "insufficient-data";
    case State::power_law: return "power-law";
    case State::saturating: return "saturating";
    case State::saturated: return "saturated";
  }
  return "unknown";
}

double expected_exponent(int dimension) {
  switch (dimension) {
    case 1: return 2.0 / 3.0;
    case 2: return 1.0;
    case 3: return 1.5;
    default: return kNaN;
  }
}

// 2D AAK Nyquist rate (header; Lin and Bird 2002, their form of AAK 1982).
double aak_rate_2d_per_s(double temperature_k, double sheet_resistance_ohm) {
  using namespace lphi::si;
  if (!(std::isfinite(temperature_k) && temperature_k > 0.0)) return kNaN;
  if (!(std::isfinite(sheet_resistance_ohm) && sheet_resistance_ohm > 0.0)) return kNaN;
  const double e2r = elementary_charge_c * elementary_charge_c * sheet_resistance_ohm;
  const double log_g = std::log(pi * hbar_j_s / e2r);
  if (!(log_g > 0.0)) return kNaN;
  return boltzmann_j_per_k * temperature_k * e2r / (2.0 * pi * hbar_j_s * hbar_j_s) * log_g;
}

// 1D AAK Nyquist rate (header; AAK 1982).
double aak_rate_1d_per_s(double temperature_k, double resistance_per_length_ohm_m,
                         double diffusion_m2s) {
  using namespace lphi::si;
  if (!(std::isfinite(temperature_k) && temperature_k > 0.0)) return kNaN;
  if (!(std::isfinite(resistance_per_length_ohm_m) && resistance_per_length_ohm_m > 0.0))
    return kNaN;
  if (!(std::isfinite(diffusion_m2s) && diffusion_m2s > 0.0)) return kNaN;
  const double inner = elementary_charge_c * elementary_charge_c * resistance_per_length_ohm_m *
                       std::sqrt(diffusion_m2s) * boltzmann_j_per_k * temperature_k /
                       (2.0 * std::numbers::sqrt2 * hbar_j_s * hbar_j_s);
  return std::cbrt(inner * inner);
}

double f_distribution_upper_tail(double f, double d1, double d2) {
  if (!(std::isfinite(f) && f >= 0.0)) return kNaN;
  if (!(std::isfinite(d1) && d1 > 0.0 && std::isfinite(d2) && d2 > 0.0)) return kNaN;
  const boost::math::fisher_f_distribution<double> dist(d1, d2);
  return boost::math::cdf(boost::math::complement(dist, f));
}

FTest nested_f_test(double chi2_restricted, double chi2_full, std::size_t n,
                    std::size_t k_full, std::size_t extra, double total_sum_of_squares) {
  FTest t;
  if (n <= k_full || extra == 0) return t;
  const double improvement = chi2_restricted - chi2_full;
  if (!(improvement > kChi2Resolution * total_sum_of_squares)) return t;
  const double d1 = static_cast<double>(extra);
  const double d2 = static_cast<double>(n - k_full);
  if (!(chi2_full > 0.0)) {
    t.f_statistic = std::numeric_limits<double>::infinity();
    t.p_value = 0.0;
    return t;
  }
  t.f_statistic = (improvement / d1) / (chi2_full / d2);
  t.p_value = f_distribution_upper_tail(t.f_statistic, d1, d2);
  return t;
}

DephasingResult fit_dephasing(std::span<const LphiPoint> points, const DephasingOptions& options) {
  DephasingResult r;
  r.n_points = points.size();
  r.error = validate(points, options);
  if (!r.error.empty()) return r;
  r.expected_exponent = expected_exponent(options.dimension);

  std::vector<double> temps;
  temps.reserve(points.size());
  for (const auto& pt : points) temps.push_back(pt.temperature_k);
  std::sort(temps.begin(), temps.end());
  temps.erase(std::unique(temps.begin(), temps.end()), temps.end());
  r.n_temperatures = temps.size();
  if (temps.size() < options.min_points) {
    r.notes.push_back("fewer distinct temperatures than options.min_points");
    return r;
  }
  const double t_min = temps.front();
  if (temps.back() / t_min < options.min_span_ratio) {
    r.notes.push_back("T_max / T_min below options.min_span_ratio");
    return r;
  }

  // The data in fit form. Unknown errors: sigma_y = y (equal relative weights).
  Data d;
  const std::size_t n = points.size();
  r.errors_from_scatter = points[0].lphi_err_m == 0.0;
  double sum_ln_t = 0.0;
  for (const auto& pt : points) sum_ln_t += std::log(pt.temperature_k);
  d.ln_t_ref = sum_ln_t / static_cast<double>(n);
  r.reference_temperature_k = std::exp(d.ln_t_ref);
  for (std::size_t i = 0; i < n; ++i) {
    const auto& pt = points[i];
    const double y = 1.0 / (pt.lphi_m * pt.lphi_m);
    const double sigma_y = r.errors_from_scatter ? y : 2.0 * pt.lphi_err_m / std::pow(pt.lphi_m, 3);
    // Lengths so extreme that L^-2 or its error leave the double range.
    if (!(std::isfinite(y) && y > 0.0 && std::isfinite(sigma_y) && sigma_y > 0.0 &&
          std::isfinite(1.0 / (sigma_y * sigma_y)))) {
      r.error = detail::point_error(i, "lphi_m or lphi_err_m out of the representable range");
      return r;
    }
    d.x.push_back(std::log(pt.temperature_k) - d.ln_t_ref);
    d.y.push_back(y);
    d.sigma.push_back(sigma_y);
  }
  const double y_min = *std::min_element(d.y.begin(), d.y.end());
  const double u_floor = std::log(kSatFloor * y_min);

  // Total weighted sum of squares about the weighted mean: the scale against
  // which chi-square improvements are judged resolvable.
  double sw = 0, swy = 0;
  for (std::size_t i = 0; i < n; ++i) {
    sw += 1.0 / (d.sigma[i] * d.sigma[i]);
    swy += d.y[i] / (d.sigma[i] * d.sigma[i]);
  }
  double tss = 0.0;
  for (std::size_t i = 0; i < n; ++i) tss += std::pow((d.y[i] - swy / sw) / d.sigma[i], 2);

  auto clamp_p = [](double p) { return std::clamp(p, kMinExponent, kMaxExponent); };

  // Pure power law, started from the log-log line through all points.
  std::vector<std::size_t> all(n);
  std::iota(all.begin(), all.end(), std::size_t{0});
  const auto [w_all, p_all] = log_log_line(d, all);
  const Solution pl = solve(d, {w_all, clamp_p(p_all)}, false, 0.0, options.max_iterations);

  // Saturating model. Start A: the line through the upper half of the
  // temperatures (where saturation matters least), and the excess over it at
  // the lowest quarter. A slope too flat to be a power law (fully saturated
  // data) is replaced by the expected exponent.
  const double t_median = temps[temps.size() / 2];
  const double t_quarter = temps[(temps.size() - 1) / 4];
  std::vector<std::size_t> upper, lowest;
  for (std::size_t i = 0; i < n; ++i) {
    if (points[i].temperature_k >= t_median) upper.push_back(i);
    if (points[i].temperature_k <= t_quarter) lowest.push_back(i);
  }
  auto [w0, p0] = log_log_line(d, upper);
  if (!(p0 > 0.1)) {
    p0 = r.expected_exponent;
    double s = 0.0;
    for (std::size_t i : upper) s += std::log(d.y[i]) - p0 * d.x[i];
    w0 = s / static_cast<double>(upper.size());
  }
  double excess = 0.0;
  for (std::size_t i : lowest) excess += d.y[i] - std::exp(w0 + p0 * d.x[i]);
  excess /= static_cast<double>(lowest.size());
  const double u0 = std::log(std::max(excess, 1e-3 * y_min));
  Solution sat = solve(d, {u0, w0, clamp_p(p0)}, true, u_floor, options.max_iterations);
  // Start B: the power-law solution plus a saturation term of a tenth of the
  // smallest rate.
  const Solution sat_b =
      solve(d, {std::log(0.1 * y_min), pl.q[0], pl.q[1]}, true, u_floor, options.max_iterations);
  if (sat_b.chi2 < sat.chi2) sat = sat_b;

  r.power_law.converged = pl.converged;
  r.chi2_power_law = pl.chi2;
  r.saturation_at_boundary =
      std::exp(sat.q[0]) < kSatNegligible * y_min || !(sat.chi2 < pl.chi2);
  // At the boundary the saturating model is not used, so its run's ending
  // (often on the bound, where LM may stop by iteration count) does not count.
  r.converged = pl.converged && (sat.converged || r.saturation_at_boundary);
  r.chi2_saturating = r.saturation_at_boundary ? std::min(pl.chi2, sat.chi2) : sat.chi2;
  r.aic_power_law = aic(r.chi2_power_law, n, 2, r.errors_from_scatter);
  r.aic_saturating = aic(r.chi2_saturating, n, 3, r.errors_from_scatter);
  if (!r.converged) r.notes.push_back("a Levenberg-Marquardt run did not report convergence");

  if (!r.saturation_at_boundary) {
    const FTest ft = nested_f_test(pl.chi2, sat.chi2, n, 3, 1, tss);
    r.f_statistic = ft.f_statistic;
    r.p_value = ft.p_value;
  } else {
    r.notes.push_back("saturation term ran to zero: the saturating model is the power law");
  }
  const bool significant = !r.saturation_at_boundary && r.p_value < options.significance;

  // Is any temperature dependence resolved at all? The constant model
  // y = L_sat^-2 (the weighted mean; its chi-square is tss) is the saturating
  // model with b -> 0, two parameters fewer.
  const FTest flat_test = nested_f_test(tss, r.chi2_saturating, n, 3, 2, tss);
  r.temperature_independent = !(flat_test.p_value < options.significance);

  // Power-law parameters (also reported on their own).
  const double ln_t_ref = d.ln_t_ref;
  auto set_power_law = [&](PowerLawFit& out) {
    out.p = pl.q[1];
    out.b = std::exp(pl.q[0] - pl.q[1] * ln_t_ref);
    out.chi2 = pl.chi2;
    if (pl.cov.size() == 0) return;
    const double scale = r.errors_from_scatter ? pl.chi2 / static_cast<double>(n - 2) : 1.0;
    const Eigen::Matrix2d c = pl.cov * scale;
    out.p_err = std::sqrt(c(1, 1));
    const double var_ln_b = c(0, 0) + ln_t_ref * ln_t_ref * c(1, 1) - 2.0 * ln_t_ref * c(0, 1);
    out.b_err = out.b * std::sqrt(std::max(var_ln_b, 0.0));
  };
  set_power_law(r.power_law);
  if (pl.cov.size() == 0) r.notes.push_back("power-law covariance singular: no errors");

  // The selected model's ln(b T_ref^p) with its variance (for the AAK ratio).
  double w_sel = pl.q[0];
  double var_w_sel = kNaN;
  if (pl.cov.size() != 0)
    var_w_sel = pl.cov(0, 0) * (r.errors_from_scatter ? pl.chi2 / static_cast<double>(n - 2) : 1.0);

  bool power_term = true;  // the fitted b T^p term is reported
  if (significant && r.temperature_independent) {
    // L_phi does not change over the measured range, and the power law cannot
    // describe that: saturated throughout, T_sat above the data. Only L_sat
    // (from the weighted mean of y) is reported.
    power_term = false;
    r.state = State::saturated;
    const double c = swy / sw;
    const double var_c = (r.errors_from_scatter ? tss / static_cast<double>(n - 1) : 1.0) / sw;
    r.lphi_sat_m = 1.0 / std::sqrt(c);
    r.lphi_sat_err_m = *r.lphi_sat_m * 0.5 * std::sqrt(var_c) / c;
    r.notes.push_back(
        "no temperature dependence resolved: L_phi is constant over the measured range, "
        "T_sat lies above it; exponent, prefactor and T_sat not reported");
  } else if (!significant) {
    r.state = State::power_law;
    r.exponent_p = r.power_law.p;
    r.prefactor_b = r.power_law.b;
    if (pl.cov.size() != 0) {
      r.exponent_p_err = r.power_law.p_err;
      r.prefactor_b_err = r.power_law.b_err;
    }
  } else {
    const double u = sat.q[0], w = sat.q[1], p = sat.q[2];
    r.exponent_p = p;
    r.prefactor_b = std::exp(w - p * ln_t_ref);
    r.lphi_sat_m = std::exp(-0.5 * u);
    r.t_sat_k = std::exp(ln_t_ref + (u - w) / p);
    w_sel = w;
    if (sat.cov.size() != 0) {
      const double scale = r.errors_from_scatter ? sat.chi2 / static_cast<double>(n - 3) : 1.0;
      const Eigen::Matrix3d c = sat.cov * scale;
      var_w_sel = c(1, 1);
      r.exponent_p_err = std::sqrt(c(2, 2));
      // ln b = w - p ln T_ref.
      const Eigen::Vector3d g_b(0.0, 1.0, -ln_t_ref);
      r.prefactor_b_err = *r.prefactor_b * std::sqrt(std::max(g_b.dot(c * g_b), 0.0));
      // ln L_sat = -u/2.
      r.lphi_sat_err_m = *r.lphi_sat_m * 0.5 * std::sqrt(c(0, 0));
      // ln T_sat = ln T_ref + (u - w)/p.
      const Eigen::Vector3d g_t(1.0 / p, -1.0 / p, -(u - w) / (p * p));
      r.t_sat_err_k = *r.t_sat_k * std::sqrt(std::max(g_t.dot(c * g_t), 0.0));
    } else {
      r.notes.push_back("saturating-model covariance singular: no errors");
    }
    r.state = t_min < options.saturated_ratio * *r.t_sat_k ? State::saturated : State::saturating;
  }
  if (r.exponent_p && (*r.exponent_p <= kMinExponent * 1.001 || *r.exponent_p >= kMaxExponent * 0.999)) {
    r.notes.push_back("exponent p at the edge of its allowed range");
    if (r.t_sat_k) {
      r.t_sat_k.reset();
      r.t_sat_err_k.reset();
      r.notes.push_back("T_sat not reported: it rests on an exponent at its bound");
    }
  }

  // AAK comparison at T_ref.
  if (!power_term) {
    if (options.diffusion_m2s) r.notes.push_back("AAK comparison skipped: no power-law term resolved");
  } else if (options.diffusion_m2s && !(std::isfinite(*options.diffusion_m2s) &&
                                  *options.diffusion_m2s > 0.0)) {
    r.notes.push_back("AAK comparison skipped: diffusion_m2s must be finite and > 0");
  } else if (options.diffusion_m2s) {
    const double dif = *options.diffusion_m2s;
    double rate_ref = kNaN;
    if (options.dimension == 2 && options.sheet_resistance_ohm) {
      rate_ref = aak_rate_2d_per_s(r.reference_temperature_k, *options.sheet_resistance_ohm);
      r.aak_rate_per_s_at_1k = aak_rate_2d_per_s(1.0, *options.sheet_resistance_ohm);
    } else if (options.dimension == 1 && options.resistance_per_length_ohm_m) {
      rate_ref = aak_rate_1d_per_s(r.reference_temperature_k,
                                   *options.resistance_per_length_ohm_m, dif);
      r.aak_rate_per_s_at_1k = aak_rate_1d_per_s(1.0, *options.resistance_per_length_ohm_m, dif);
    } else {
      r.notes.push_back(
          "AAK comparison needs sheet_resistance_ohm (dimension 2) or "
          "resistance_per_length_ohm_m (dimension 1)");
    }
    if (r.aak_rate_per_s_at_1k && !std::isfinite(*r.aak_rate_per_s_at_1k)) {
      r.aak_rate_per_s_at_1k.reset();
      r.notes.push_back("AAK comparison skipped: D or the resistance outside the formula's domain");
    } else if (std::isfinite(rate_ref)) {
      r.aak_ratio = std::exp(w_sel) / (rate_ref / dif);
      if (std::isfinite(var_w_sel)) r.aak_ratio_err = *r.aak_ratio * std::sqrt(var_w_sel);
    }
  }
  return r;
}

}  // namespace lphi::dephasing
