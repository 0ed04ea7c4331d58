// L_phi(T): power law with and without saturation, and the verdict. One
// algorithm, read top-down in fit_dephasing(): check the table, put it in fit
// form, fit both models, compare them (F-test, AIC, the flat model), report
// the model the comparison selects, and compare its power-law term with AAK.
// The estimator, the boundary rule, the F-test and the states are described
// in analysis/dephasing.hpp; the models' least-squares solves are in
// analysis/internal/dephasing_models.*, the AAK rates in analysis/aak.cpp.
#include "analysis/dephasing.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>

#include <Eigen/Dense>
#include <boost/math/distributions/fisher_f.hpp>

#include "analysis/internal/dephasing_models.hpp"
#include "analysis/internal/table_checks.hpp"

namespace lphi::dephasing {

namespace {

using models::Data;
using models::kMaxExponent;
using models::kMinExponent;
using models::log_log_line;
using models::Solution;
using models::solve;

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// ln(L_sat^-2) may not go below ln(kSatFloor * min y) (see the header); a
// saturation term below kSatNegligible * min y changes no model value by more
// than a part in a million and is treated as zero.
constexpr double kSatFloor = 1e-8;
constexpr double kSatNegligible = 1e-6;

// Improvements in chi-square below this fraction of the total weighted sum of
// squares are rounding, not signal.
constexpr double kChi2Resolution = 1e-10;

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

// The distinct temperatures, ascending.
std::vector<double> distinct_temperatures(std::span<const LphiPoint> points) {
  std::vector<double> temps;
  temps.reserve(points.size());
  for (const auto& pt : points) temps.push_back(pt.temperature_k);
  std::sort(temps.begin(), temps.end());
  temps.erase(std::unique(temps.begin(), temps.end()), temps.end());
  return temps;
}

// Why the temperatures cannot carry a fit (a note), or empty.
std::string too_little_coverage(const std::vector<double>& temps, const DephasingOptions& o) {
  if (temps.size() < o.min_points) return "fewer distinct temperatures than options.min_points";
  if (temps.back() / temps.front() < o.min_span_ratio)
    return "T_max / T_min below options.min_span_ratio";
  return {};
}

// The table in fit form: x = ln(T/T_ref) with T_ref the geometric mean of
// the temperatures, y = L_phi^-2 and its error (sigma_y = y when the errors
// are unknown: equal relative weights). Returns the error of the first point
// whose y or error leaves the double range, else empty; d.ln_t_ref is set
// either way.
std::string fit_form(std::span<const LphiPoint> points, bool errors_from_scatter, Data& d) {
  const std::size_t n = points.size();
  double sum_ln_t = 0.0;
  for (const auto& pt : points) sum_ln_t += std::log(pt.temperature_k);
  d.ln_t_ref = sum_ln_t / static_cast<double>(n);
  for (std::size_t i = 0; i < n; ++i) {
    const auto& pt = points[i];
    const double y = 1.0 / (pt.lphi_m * pt.lphi_m);
    const double sigma_y = errors_from_scatter ? y : 2.0 * pt.lphi_err_m / std::pow(pt.lphi_m, 3);
    // Lengths so extreme that L^-2 or its error leave the double range.
    if (!(std::isfinite(y) && y > 0.0 && std::isfinite(sigma_y) && sigma_y > 0.0 &&
          std::isfinite(1.0 / (sigma_y * sigma_y))))
      return detail::point_error(i, "lphi_m or lphi_err_m out of the representable range");
    d.x.push_back(std::log(pt.temperature_k) - d.ln_t_ref);
    d.y.push_back(y);
    d.sigma.push_back(sigma_y);
  }
  return {};
}

// The constant model y = c, the weighted mean: sum w and sum w y (w =
// 1/sigma^2), and its chi-square, the total weighted sum of squares, the
// scale against which chi-square improvements are judged resolvable.
struct WeightedMean {
  double sw = 0.0, swy = 0.0, tss = 0.0;
  double mean() const { return swy / sw; }
};

WeightedMean weighted_mean(const Data& d) {
  WeightedMean m;
  const std::size_t n = d.y.size();
  for (std::size_t i = 0; i < n; ++i) {
    m.sw += 1.0 / (d.sigma[i] * d.sigma[i]);
    m.swy += d.y[i] / (d.sigma[i] * d.sigma[i]);
  }
  for (std::size_t i = 0; i < n; ++i) m.tss += std::pow((d.y[i] - m.swy / m.sw) / d.sigma[i], 2);
  return m;
}

double clamp_exponent(double p) { return std::clamp(p, kMinExponent, kMaxExponent); }

// Pure power law, started from the log-log line through all points.
Solution fit_power_law(const Data& d, int max_iterations) {
  std::vector<std::size_t> all(d.y.size());
  std::iota(all.begin(), all.end(), std::size_t{0});
  const auto [w_all, p_all] = log_log_line(d, all);
  return solve(d, {w_all, clamp_exponent(p_all)}, false, 0.0, max_iterations);
}

// Saturating model, the better of two starts. Start A: the line through the
// upper half of the temperatures (where saturation matters least), and the
// excess over it at the lowest quarter. A slope too flat to be a power law
// (fully saturated data) is replaced by the expected exponent. Start B: the
// power-law solution plus a saturation term of a tenth of the smallest rate.
Solution fit_saturating(const Data& d, std::span<const LphiPoint> points,
                        const std::vector<double>& temps, const Solution& pl,
                        double expected_p, int max_iterations) {
  const std::size_t n = points.size();
  const double y_min = *std::min_element(d.y.begin(), d.y.end());
  const double u_floor = std::log(kSatFloor * y_min);
  const double t_median = temps[temps.size() / 2];
  const double t_quarter = temps[(temps.size() - 1) / 4];
  std::vector<std::size_t> upper, lowest;
  for (std::size_t i = 0; i < n; ++i) {
    if (points[i].temperature_k >= t_median) upper.push_back(i);
    if (points[i].temperature_k <= t_quarter) lowest.push_back(i);
  }
  auto [w0, p0] = log_log_line(d, upper);
  if (!(p0 > 0.1)) {
    p0 = expected_p;
    double s = 0.0;
    for (std::size_t i : upper) s += std::log(d.y[i]) - p0 * d.x[i];
    w0 = s / static_cast<double>(upper.size());
  }
  double excess = 0.0;
  for (std::size_t i : lowest) excess += d.y[i] - std::exp(w0 + p0 * d.x[i]);
  excess /= static_cast<double>(lowest.size());
  const double u0 = std::log(std::max(excess, 1e-3 * y_min));
  Solution sat = solve(d, {u0, w0, clamp_exponent(p0)}, true, u_floor, max_iterations);
  const Solution sat_b =
      solve(d, {std::log(0.1 * y_min), pl.q[0], pl.q[1]}, true, u_floor, max_iterations);
  if (sat_b.chi2 < sat.chi2) sat = sat_b;
  return sat;
}

// The comparison of the two models and of the constant one (header:
// "Boundary", "Significance", "No temperature dependence"). Returns whether
// the saturation term is significant.
bool compare_models(DephasingResult& r, const Data& d, const Solution& pl, const Solution& sat,
                    const WeightedMean& flat, const DephasingOptions& options) {
  const std::size_t n = d.y.size();
  const double y_min = *std::min_element(d.y.begin(), d.y.end());
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
    const FTest ft = nested_f_test(pl.chi2, sat.chi2, n, 3, 1, flat.tss);
    r.f_statistic = ft.f_statistic;
    r.p_value = ft.p_value;
  } else {
    r.notes.push_back("saturation term ran to zero: the saturating model is the power law");
  }

  // Is any temperature dependence resolved at all? The constant model
  // y = L_sat^-2 (the weighted mean; its chi-square is tss) is the saturating
  // model with b -> 0, two parameters fewer.
  const FTest flat_test = nested_f_test(flat.tss, r.chi2_saturating, n, 3, 2, flat.tss);
  r.temperature_independent = !(flat_test.p_value < options.significance);
  return !r.saturation_at_boundary && r.p_value < options.significance;
}

// The covariance of a solution in its parameters: unscaled with known point
// errors, scaled by chi2/(n - k) when they come from the scatter.
double covariance_scale(const DephasingResult& r, const Solution& s, std::size_t n,
                        std::size_t k) {
  return r.errors_from_scatter ? s.chi2 / static_cast<double>(n - k) : 1.0;
}

// The power law's b and p (also reported on their own) with their errors.
void report_power_law(DephasingResult& r, const Solution& pl, const Data& d) {
  const std::size_t n = d.y.size();
  const double ln_t_ref = d.ln_t_ref;
  PowerLawFit& out = r.power_law;
  out.p = pl.q[1];
  out.b = std::exp(pl.q[0] - pl.q[1] * ln_t_ref);
  out.chi2 = pl.chi2;
  if (pl.cov.size() == 0) {
    r.notes.push_back("power-law covariance singular: no errors");
    return;
  }
  const Eigen::Matrix2d c = pl.cov * covariance_scale(r, pl, n, 2);
  out.p_err = std::sqrt(c(1, 1));
  const double var_ln_b = c(0, 0) + ln_t_ref * ln_t_ref * c(1, 1) - 2.0 * ln_t_ref * c(0, 1);
  out.b_err = out.b * std::sqrt(std::max(var_ln_b, 0.0));
}

// The power-law term of the selected model, ln(b T_ref^p) with its variance,
// for the AAK comparison; absent when no power-law term is reported.
struct PowerTerm {
  bool reported = true;
  double w = 0.0;
  double var_w = kNaN;
};

// L_phi constant over the measured range, which the power law cannot
// describe: saturated throughout, T_sat above the data. Only L_sat (from the
// weighted mean of y) is reported.
void report_flat(DephasingResult& r, const WeightedMean& flat, std::size_t n) {
  r.state = State::saturated;
  const double c = flat.mean();
  const double var_c =
      (r.errors_from_scatter ? flat.tss / static_cast<double>(n - 1) : 1.0) / flat.sw;
  r.lphi_sat_m = 1.0 / std::sqrt(c);
  r.lphi_sat_err_m = *r.lphi_sat_m * 0.5 * std::sqrt(var_c) / c;
  r.notes.push_back(
      "no temperature dependence resolved: L_phi is constant over the measured range, "
      "T_sat lies above it; exponent, prefactor and T_sat not reported");
}

// The saturating model's p, b, L_sat and T_sat with errors from the full
// covariance, and the state from where T_sat lies against the data.
void report_saturating(DephasingResult& r, const Solution& sat, const Data& d, double t_min,
                       const DephasingOptions& options, PowerTerm& term) {
  const std::size_t n = d.y.size();
  const double ln_t_ref = d.ln_t_ref;
  const double u = sat.q[0], w = sat.q[1], p = sat.q[2];
  r.exponent_p = p;
  r.prefactor_b = std::exp(w - p * ln_t_ref);
  r.lphi_sat_m = std::exp(-0.5 * u);
  r.t_sat_k = std::exp(ln_t_ref + (u - w) / p);
  term.w = w;
  if (sat.cov.size() != 0) {
    const Eigen::Matrix3d c = sat.cov * covariance_scale(r, sat, n, 3);
    term.var_w = c(1, 1);
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

// The state and the parameters of the model the comparison selected.
PowerTerm report_selected(DephasingResult& r, bool significant, const Data& d,
                          const Solution& pl, const Solution& sat, const WeightedMean& flat,
                          double t_min, const DephasingOptions& options) {
  const std::size_t n = d.y.size();
  PowerTerm term;
  term.w = pl.q[0];
  if (pl.cov.size() != 0) term.var_w = pl.cov(0, 0) * covariance_scale(r, pl, n, 2);
  if (significant && r.temperature_independent) {
    term.reported = false;
    report_flat(r, flat, n);
  } else if (!significant) {
    r.state = State::power_law;
    r.exponent_p = r.power_law.p;
    r.prefactor_b = r.power_law.b;
    if (pl.cov.size() != 0) {
      r.exponent_p_err = r.power_law.p_err;
      r.prefactor_b_err = r.power_law.b_err;
    }
  } else {
    report_saturating(r, sat, d, t_min, options, term);
  }
  return term;
}

// An exponent on its bound is reported with a note; T_sat resting on it is
// withheld.
void withhold_what_rests_on_a_bound_exponent(DephasingResult& r) {
  if (!r.exponent_p ||
      !(*r.exponent_p <= kMinExponent * 1.001 || *r.exponent_p >= kMaxExponent * 0.999))
    return;
  r.notes.push_back("exponent p at the edge of its allowed range");
  if (r.t_sat_k) {
    r.t_sat_k.reset();
    r.t_sat_err_k.reset();
    r.notes.push_back("T_sat not reported: it rests on an exponent at its bound");
  }
}

// The fitted power-law term against the AAK rate at T_ref (header).
void compare_with_aak(DephasingResult& r, const PowerTerm& term, const DephasingOptions& options) {
  if (!term.reported) {
    if (options.diffusion_m2s)
      r.notes.push_back("AAK comparison skipped: no power-law term resolved");
    return;
  }
  if (!options.diffusion_m2s) return;
  if (!(std::isfinite(*options.diffusion_m2s) && *options.diffusion_m2s > 0.0)) {
    r.notes.push_back("AAK comparison skipped: diffusion_m2s must be finite and > 0");
    return;
  }
  const double dif = *options.diffusion_m2s;
  double rate_ref = kNaN;
  if (options.dimension == 2 && options.sheet_resistance_ohm) {
    rate_ref = aak_rate_2d_per_s(r.reference_temperature_k, *options.sheet_resistance_ohm);
    r.aak_rate_per_s_at_1k = aak_rate_2d_per_s(1.0, *options.sheet_resistance_ohm);
  } else if (options.dimension == 1 && options.resistance_per_length_ohm_m) {
    rate_ref =
        aak_rate_1d_per_s(r.reference_temperature_k, *options.resistance_per_length_ohm_m, dif);
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
    r.aak_ratio = std::exp(term.w) / (rate_ref / dif);
    if (std::isfinite(term.var_w)) r.aak_ratio_err = *r.aak_ratio * std::sqrt(term.var_w);
  }
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
  const std::vector<double> temps = distinct_temperatures(points);
  r.n_temperatures = temps.size();
  if (std::string note = too_little_coverage(temps, options); !note.empty()) {
    r.notes.push_back(std::move(note));
    return r;
  }

  Data d;
  r.errors_from_scatter = points[0].lphi_err_m == 0.0;
  r.error = fit_form(points, r.errors_from_scatter, d);
  r.reference_temperature_k = std::exp(d.ln_t_ref);
  if (!r.error.empty()) return r;
  const WeightedMean flat = weighted_mean(d);

  const Solution pl = fit_power_law(d, options.max_iterations);
  const Solution sat =
      fit_saturating(d, points, temps, pl, r.expected_exponent, options.max_iterations);
  const bool significant = compare_models(r, d, pl, sat, flat, options);
  report_power_law(r, pl, d);
  const PowerTerm term = report_selected(r, significant, d, pl, sat, flat, temps.front(), options);
  withhold_what_rests_on_a_bound_exponent(r);
  compare_with_aak(r, term, options);
  return r;
}

}  // namespace lphi::dephasing
