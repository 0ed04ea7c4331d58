#include "analysis/sweep_residuals.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

#include <fmt/format.h>

#include "analysis/constants.hpp"
#include "analysis/magnetoconductance.hpp"

namespace lphi::fit {

namespace {

bool fits_lso(const SweepFitOptions& options) {
  return options.model == mc::Model::hln2d_so ||
         (options.model == mc::Model::wire1d && options.wire_spin_orbit);
}

// alpha was fitted freely when it has a positive error (a held alpha has
// alpha_err = 0, sweep_fit.hpp).
bool alpha_free(const SweepFitResult& result) {
  return result.model == mc::Model::hln2d && result.alpha && result.alpha_err &&
         *result.alpha_err > 0.0;
}

// ln C(n, k), -infinity when k is outside 0..n.
double ln_choose(double n, double k) {
  if (k < 0.0 || k > n) return -std::numeric_limits<double>::infinity();
  return std::lgamma(n + 1.0) - std::lgamma(k + 1.0) - std::lgamma(n - k + 1.0);
}

// P(R = r) for n1 and n2 signs in random order (Swed and Eisenhart 1943):
//   r = 2k:     2 C(n1-1, k-1) C(n2-1, k-1) / C(n1+n2, n1)
//   r = 2k + 1: [C(n1-1, k) C(n2-1, k-1) + C(n1-1, k-1) C(n2-1, k)] / C(n1+n2, n1)
double runs_probability(double n1, double n2, std::size_t r) {
  const double total = ln_choose(n1 + n2, n1);
  const double k = static_cast<double>(r / 2);
  if (r % 2 == 0)
    return 2.0 * std::exp(ln_choose(n1 - 1, k - 1) + ln_choose(n2 - 1, k - 1) - total);
  return std::exp(ln_choose(n1 - 1, k) + ln_choose(n2 - 1, k - 1) - total) +
         std::exp(ln_choose(n1 - 1, k - 1) + ln_choose(n2 - 1, k) - total);
}

// The residuals inside the fit window, in field order (points are sorted by
// field, conductance::prepare_sweep).
std::vector<double> window_residuals(std::span<const conductance::DeltaSigmaPoint> points,
                                     const SweepFitResult& result,
                                     const SweepFitOptions& options) {
  std::vector<double> r;
  for (const conductance::DeltaSigmaPoint& p : points)
    if (std::fabs(p.field_t) <= result.field_window_t)
      r.push_back(p.delta_sigma_s - fitted_delta_sigma_s(result, options, p.field_t));
  return r;
}

// The lag-1 autocorrelation of x about its mean; 0 when undefined.
double lag1_autocorrelation(const std::vector<double>& x) {
  if (x.size() < 3) return 0.0;
  double mean = 0.0;
  for (double v : x) mean += v;
  mean /= static_cast<double>(x.size());
  double c0 = 0.0, c1 = 0.0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    c0 += (x[i] - mean) * (x[i] - mean);
    if (i > 0) c1 += (x[i] - mean) * (x[i - 1] - mean);
  }
  return c0 > 0.0 ? c1 / c0 : 0.0;
}

}  // namespace

RunsTest runs_test(std::span<const double> values) {
  RunsTest t;
  int previous = 0;
  for (double v : values) {
    if (!(v != 0.0) || !std::isfinite(v)) continue;
    const int sign = v > 0.0 ? 1 : -1;
    (sign > 0 ? t.n_positive : t.n_negative) += 1;
    if (sign != previous) ++t.runs;
    previous = sign;
  }
  const double n1 = static_cast<double>(t.n_positive), n2 = static_cast<double>(t.n_negative);
  const double n = n1 + n2;
  if (t.n_positive == 0 || t.n_negative == 0) {
    t.expected_runs = static_cast<double>(t.runs);
    return t;
  }
  t.expected_runs = 2.0 * n1 * n2 / n + 1.0;
  if (t.n_positive + t.n_negative <= kRunsExactMax) {
    double p = 0.0;
    for (std::size_t r = 2; r <= t.runs; ++r) p += runs_probability(n1, n2, r);
    t.p_value = std::min(1.0, p);
  } else {
    const double mu = t.expected_runs;
    const double sd = std::sqrt((mu - 1.0) * (mu - 2.0) / (n - 1.0));
    const double z = (static_cast<double>(t.runs) + 0.5 - mu) / sd;
    t.p_value = 0.5 * std::erfc(-z / std::sqrt(2.0));
  }
  return t;
}

FitQuality judge_quality(std::span<const conductance::DeltaSigmaPoint> points,
                         const SweepFitResult& result, const SweepFitOptions& options,
                         std::size_t half_width) {
  FitQuality q;
  if (!result.ok) {
    q.unusable = true;
    q.reason = "the fit failed: " + result.error;
    return q;
  }
  q.chi2_red = chi2_red_against_noise(points, result, options, half_width);
  if (q.chi2_red) q.error_scale = std::sqrt(std::max(1.0, *q.chi2_red));

  const std::vector<double> r = window_residuals(points, result, options);
  const double rho = std::clamp(lag1_autocorrelation(r), 0.0, 0.99);
  const std::size_t cap = std::max<std::size_t>(1, r.size() / kRunsMinBlocks);
  const double correlation_time = (1.0 + rho) / (1.0 - rho);
  q.runs_block = std::min(cap, static_cast<std::size_t>(std::ceil(correlation_time - 1e-9)));
  std::vector<double> blocks;
  for (std::size_t i = 0; i + q.runs_block <= r.size(); i += q.runs_block) {
    double sum = 0.0;
    for (std::size_t k = i; k < i + q.runs_block; ++k) sum += r[k];
    blocks.push_back(sum);
  }
  const RunsTest runs = runs_test(blocks);
  q.runs_p = runs.p_value;

  if (q.chi2_red && *q.chi2_red > kChi2RedUnusable) {
    q.unusable = true;
    q.reason = fmt::format(
        "chi2_red {:.3g} against the sweep's own noise exceeds {:.3g}: the model does not "
        "describe the sweep",
        *q.chi2_red, kChi2RedUnusable);
  } else if (q.runs_p < kRunsPUnusable) {
    q.unusable = true;
    q.reason = fmt::format(
        "the residuals have structure: {} runs of one sign where {:.1f} are expected (runs "
        "test p = {:.2g} over {} blocks of {} points)",
        runs.runs, runs.expected_runs, q.runs_p, blocks.size(), q.runs_block);
  }
  return q;
}

int fitted_parameter_count(const SweepFitResult& result, const SweepFitOptions& options) {
  int p = 1;  // L_phi
  if (fits_lso(options)) ++p;
  if (alpha_free(result)) ++p;
  if (options.fit_offset) ++p;
  if (options.fit_background) ++p;
  if (options.fit_odd_term) ++p;
  return p;
}

double fitted_delta_sigma_s(const SweepFitResult& result, const SweepFitOptions& options,
                            double field_t) {
  if (!result.ok) return std::numeric_limits<double>::quiet_NaN();
  const double lphi = result.lphi_m;
  const double lso = result.lso_m.value_or(0.0);
  double model = 0.0;
  switch (result.model) {
    case mc::Model::hln2d:
      model = mc::hln2d(field_t, result.alpha.value_or(options.alpha_default), lphi);
      break;
    case mc::Model::hln2d_so:
      model = mc::hln2d_so(field_t, lphi, lso);
      break;
    case mc::Model::wire1d:
      model = fits_lso(options) ? mc::wire1d_so(field_t, lphi, lso, options.geometry.width_m)
                                : mc::wire1d(field_t, lphi, options.geometry.width_m);
      break;
    case mc::Model::kawabata3d:
      model = mc::kawabata3d(field_t, lphi, options.geometry.thickness_m);
      break;
  }
  double value = si::wl_conductance_s * model;
  if (options.fit_offset) value += result.offset_s;
  if (options.fit_background && result.background_s_per_t2)
    value += *result.background_s_per_t2 * field_t * field_t;
  if (options.fit_odd_term && result.odd_s_per_t) value += *result.odd_s_per_t * std::fabs(field_t);
  return value;
}

std::optional<double> chi2_red_against_noise(std::span<const conductance::DeltaSigmaPoint> points,
                                             const SweepFitResult& result,
                                             const SweepFitOptions& options,
                                             std::size_t half_width) {
  if (!result.ok) return std::nullopt;
  std::vector<conductance::DeltaSigmaPoint> residuals(points.begin(), points.end());
  for (conductance::DeltaSigmaPoint& r : residuals)
    r.delta_sigma_s -= fitted_delta_sigma_s(result, options, r.field_t);
  const std::vector<double> noise = conductance::point_noise_profile_s(residuals, half_width);
  double chi2 = 0.0;
  std::size_t n = 0;
  for (std::size_t i = 0; i < residuals.size(); ++i) {
    if (!(std::fabs(residuals[i].field_t) <= result.field_window_t)) continue;
    const double s = noise[i];
    if (!(s > 0.0) || !std::isfinite(s)) return std::nullopt;
    const double r = residuals[i].delta_sigma_s / s;
    if (!std::isfinite(r)) return std::nullopt;
    chi2 += r * r;
    ++n;
  }
  const int p = fitted_parameter_count(result, options);
  if (n <= static_cast<std::size_t>(p)) return std::nullopt;
  return chi2 / static_cast<double>(n - static_cast<std::size_t>(p));
}

}  // namespace lphi::fit
