#include "analysis/conductance.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include <fmt/format.h>

#include "analysis/internal/cubic_interpolation.hpp"

namespace lphi::conductance {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// A symmetrized sheet resistance at |B|, with the number of raw readings that
// went into it (2 for a mirrored pair, 1 for a reading at exactly B = 0).
struct SymmetrizedPoint {
  double field_t;
  double rsq_ohm;
  double readings;
};

std::string format_field(double field_t) { return fmt::format("{:.6g} T", field_t); }

// Cubic interpolation of the sorted curve (analysis/internal/cubic_interpolation.hpp)
// at field_t, which must lie inside [front, back]. Readings taken twice at
// the same field are averaged by the caller before this is used.
double interpolate(const std::vector<double>& field, const std::vector<double>& value,
                   double field_t) {
  return detail::apply_stencil(detail::cubic_stencil(field, field_t), value);
}

// sigma(0) from a robust weighted least-squares fit of a + c B^2 to the
// innermost points: Tukey-biweight iteratively reweighted least squares with
// the scale from the median absolute deviation. The prior weight of a point is
// the number of raw readings averaged into it. A single wild reading (a spike
// at B = 0) gets weight zero instead of setting the reference of the sweep.
struct ZeroFieldEstimate {
  double sigma0_s;
  double sigma0_err_s;
};

ZeroFieldEstimate estimate_sigma0(const std::vector<double>& field_t,
                                  const std::vector<double>& sigma_s,
                                  const std::vector<double>& prior_weight) {
  const std::size_t n = field_t.size();
  // Scale B^2 to order one so that the 2x2 normal equations are well conditioned.
  double b2_max = 0.0;
  for (double b : field_t) b2_max = std::max(b2_max, b * b);
  if (b2_max == 0.0) b2_max = 1.0;

  std::vector<double> weight = prior_weight;
  std::vector<double> residual(n, 0.0);
  double a = 0.0, c = 0.0;
  for (int iteration = 0; iteration < 20; ++iteration) {
    double s0 = 0, s1 = 0, s2 = 0, t0 = 0, t1 = 0;
    for (std::size_t i = 0; i < n; ++i) {
      const double u = field_t[i] * field_t[i] / b2_max;
      const double w = weight[i];
      s0 += w;
      s1 += w * u;
      s2 += w * u * u;
      t0 += w * sigma_s[i];
      t1 += w * u * sigma_s[i];
    }
    const double det = s0 * s2 - s1 * s1;
    double a_new, c_new;
    if (det > 1e-12 * s0 * s2 && s0 > 0) {
      a_new = (s2 * t0 - s1 * t1) / det;
      c_new = (s0 * t1 - s1 * t0) / det;
    } else {  // all surviving points at one |B|: the weighted mean
      a_new = t0 / s0;
      c_new = 0.0;
    }
    for (std::size_t i = 0; i < n; ++i)
      residual[i] = sigma_s[i] - a_new - c_new * field_t[i] * field_t[i] / b2_max;

    // Robust scale: 1.4826 * MAD is the standard deviation for Gaussian noise
    // (common practice). Residuals are scaled by sqrt(prior weight) so that
    // averaged points and single readings are judged on the same footing.
    std::vector<double> scaled(n);
    for (std::size_t i = 0; i < n; ++i)
      scaled[i] = std::abs(residual[i]) * std::sqrt(prior_weight[i]);
    std::nth_element(scaled.begin(), scaled.begin() + static_cast<long>(n / 2), scaled.end());
    const double mad = scaled[n / 2];
    const double scale = 1.4826 * mad;
    const bool settled = iteration > 0 && std::abs(a_new - a) <= 1e-12 * std::abs(a_new) &&
                         std::abs(c_new - c) <= 1e-12 * (std::abs(c_new) + std::abs(a_new));
    a = a_new;
    c = c_new;
    if (scale == 0.0 || settled) break;
    // Tukey biweight with the usual tuning constant 4.685 (95% efficiency for
    // Gaussian noise; common practice).
    const double k = 4.685 * scale;
    for (std::size_t i = 0; i < n; ++i) {
      const double z = residual[i] * std::sqrt(prior_weight[i]) / k;
      weight[i] = std::abs(z) < 1.0 ? prior_weight[i] * (1 - z * z) * (1 - z * z) : 0.0;
    }
  }

  // Final estimate: the prior-weighted fit over the points the biweight kept
  // (for Gaussian noise that is nearly all of them), with the classical
  // standard error s^2 (X^T P X)^-1 of that fit. Treating the robust weights
  // themselves as fixed would understate the error.
  double s0 = 0, s1 = 0, s2 = 0, t0 = 0, t1 = 0, used = 0;
  for (std::size_t i = 0; i < n; ++i) {
    if (!(weight[i] > 0.0)) continue;
    const double u = field_t[i] * field_t[i] / b2_max;
    const double w = prior_weight[i];
    s0 += w;
    s1 += w * u;
    s2 += w * u * u;
    t0 += w * sigma_s[i];
    t1 += w * u * sigma_s[i];
    used += 1.0;
  }
  const double det = s0 * s2 - s1 * s1;
  if (!(det > 1e-12 * s0 * s2) || used < 3.0) return {a, kNaN};
  a = (s2 * t0 - s1 * t1) / det;
  c = (s0 * t1 - s1 * t0) / det;
  double ssr = 0.0;
  for (std::size_t i = 0; i < n; ++i) {
    if (!(weight[i] > 0.0)) continue;
    const double r = sigma_s[i] - a - c * field_t[i] * field_t[i] / b2_max;
    ssr += prior_weight[i] * r * r;
  }
  return {a, std::sqrt(ssr / (used - 2.0) * s2 / det)};
}

}  // namespace

double resistance_ohm(double lockin_x_v, double current_a, double gain) {
  if (!(current_a != 0.0) || !(gain != 0.0)) return kNaN;
  return lockin_x_v / (gain * current_a);
}

double sheet_resistance_ohm(double resistance, double squares) {
  if (!(squares > 0.0)) return kNaN;
  return resistance / squares;
}

double sheet_conductance_s(double sheet_resistance) {
  if (!(sheet_resistance != 0.0)) return kNaN;
  return 1.0 / sheet_resistance;
}

double sheet_conductance_xx_s(double rho_xx_ohm, double rho_xy_ohm) {
  const double denominator = rho_xx_ohm * rho_xx_ohm + rho_xy_ohm * rho_xy_ohm;
  if (!(denominator > 0.0)) return kNaN;
  return rho_xx_ohm / denominator;
}

PrepareStatus prepare_sweep(std::span<const FieldPoint> sheet_resistance, PreparedSweep& out) {
  return prepare_sweep(sheet_resistance, PrepareOptions{}, out);
}

PrepareStatus prepare_sweep(std::span<const FieldPoint> sheet_resistance,
                            const PrepareOptions& options, PreparedSweep& out) {
  out = PreparedSweep{};
  out.field_offset_t = options.field_offset_t;
  out.n_input = sheet_resistance.size();
  auto fail = [](std::string message) { return PrepareStatus{false, std::move(message)}; };

  if (sheet_resistance.empty()) return fail("the sweep is empty");
  for (std::size_t i = 0; i < sheet_resistance.size(); ++i) {
    const FieldPoint& p = sheet_resistance[i];
    if (!std::isfinite(p.field_t))
      return fail("point " + std::to_string(i) + " has a non-finite field");
    if (!std::isfinite(p.value))
      return fail("point " + std::to_string(i) + " (B = " + format_field(p.field_t) +
                  ") has a non-finite sheet resistance");
    if (!(p.value > 0.0))
      return fail("point " + std::to_string(i) + " (B = " + format_field(p.field_t) +
                  ") has a sheet resistance <= 0 ohm");
  }

  if (!std::isfinite(options.field_offset_t))
    return fail("the field offset is not finite");
  // Sort by field and average readings repeated at the same field.
  std::vector<FieldPoint> sorted(sheet_resistance.begin(), sheet_resistance.end());
  for (FieldPoint& p : sorted) p.field_t -= options.field_offset_t;
  std::stable_sort(sorted.begin(), sorted.end(),
                   [](const FieldPoint& a, const FieldPoint& b) { return a.field_t < b.field_t; });
  std::vector<FieldPoint> curve;
  std::vector<double> repeats;
  for (const FieldPoint& p : sorted) {
    if (!curve.empty() && curve.back().field_t == p.field_t) {
      repeats.back() += 1.0;
      curve.back().value += (p.value - curve.back().value) / repeats.back();
    } else {
      curve.push_back(p);
      repeats.push_back(1.0);
    }
  }

  std::size_t n_negative = 0, n_positive = 0;
  for (const FieldPoint& p : curve) {
    if (p.field_t < 0) ++n_negative;
    if (p.field_t > 0) ++n_positive;
  }
  constexpr std::size_t kMinPerSide = 8;
  std::vector<SymmetrizedPoint> symmetric;
  const bool one_sided = options.allow_one_sided &&
                         (n_negative < kMinPerSide || n_positive < kMinPerSide);
  if (one_sided) {
    // No mirror: the side with more points, at |B|, as measured.
    const bool positive = n_positive >= n_negative;
    if (std::max(n_negative, n_positive) < kMinPerSide)
      return fail("too few points for a one-sided sweep: " +
                  std::to_string(std::max(n_negative, n_positive)) + " on its side (at least " +
                  std::to_string(kMinPerSide) + " needed)");
    for (std::size_t i = 0; i < curve.size(); ++i) {
      const FieldPoint& p = curve[i];
      if (p.field_t == 0.0 || (p.field_t > 0) == positive)
        symmetric.push_back({std::abs(p.field_t), p.value, repeats[i]});
    }
    out.symmetrized = false;
  }
  if (!one_sided && (n_negative == 0 || n_positive == 0))
    return fail(std::string("the sweep does not cross zero field (all fields are ") +
                (n_positive == 0 ? "<= 0" : ">= 0") + "); symmetrizing needs both signs of B");
  if (!one_sided && (n_negative < kMinPerSide || n_positive < kMinPerSide))
    return fail("too few points to symmetrize: " + std::to_string(n_negative) + " at B < 0 and " +
                std::to_string(n_positive) + " at B > 0 (at least " + std::to_string(kMinPerSide) +
                " needed on each side)");

  // Symmetrize at the measured fields of the denser side; the opposite branch
  // is interpolated (cubic, see interpolate) at the mirrored field. Fields whose mirror lies
  // outside the measured range are dropped. Using one side only keeps every
  // raw reading in at most one symmetrized point (besides interpolation), so
  // that the points stay independent.
  const bool use_positive = n_positive >= n_negative;
  const double low = curve.front().field_t;
  const double high = curve.back().field_t;
  std::vector<double> curve_field(curve.size()), curve_value(curve.size());
  for (std::size_t i = 0; i < curve.size(); ++i) {
    curve_field[i] = curve[i].field_t;
    curve_value[i] = curve[i].value;
  }
  for (std::size_t i = 0; !one_sided && i < curve.size(); ++i) {
    const FieldPoint& p = curve[i];
    if (p.field_t == 0.0) {
      symmetric.push_back({0.0, p.value, repeats[i]});
      continue;
    }
    if ((p.field_t > 0) != use_positive) continue;
    const double mirror = -p.field_t;
    if (mirror < low || mirror > high) continue;
    const double opposite = interpolate(curve_field, curve_value, mirror);
    symmetric.push_back({std::abs(p.field_t), 0.5 * (p.value + opposite), repeats[i] + 1.0});
  }
  std::sort(
      symmetric.begin(), symmetric.end(),
      [](const SymmetrizedPoint& a, const SymmetrizedPoint& b) { return a.field_t < b.field_t; });
  if (symmetric.size() < kMinPerSide)
    return fail("only " + std::to_string(symmetric.size()) +
                " fields can be mirrored between the two branches (at least " +
                std::to_string(kMinPerSide) + " needed); the branches barely overlap");

  // sigma(0) from the innermost points: enough of them to average the noise
  // down, few enough that a + c B^2 still describes the curve there.
  const std::size_t n_inner =
      std::min(symmetric.size(), std::clamp<std::size_t>(symmetric.size() / 5, 16, 25));
  std::vector<double> inner_field, inner_sigma, inner_weight;
  for (std::size_t i = 0; i < n_inner; ++i) {
    inner_field.push_back(symmetric[i].field_t);
    inner_sigma.push_back(1.0 / symmetric[i].rsq_ohm);
    inner_weight.push_back(symmetric[i].readings);
  }
  const ZeroFieldEstimate zero = estimate_sigma0(inner_field, inner_sigma, inner_weight);
  if (!(zero.sigma0_s > 0.0) || !std::isfinite(zero.sigma0_s))
    return fail(
        "the zero-field conductance estimate is not positive; the points nearest "
        "B = 0 are inconsistent");

  out.sigma0_s = zero.sigma0_s;
  out.sigma0_err_s = zero.sigma0_err_s;
  out.rsq0_ohm = 1.0 / zero.sigma0_s;
  out.points.reserve(symmetric.size());
  for (const SymmetrizedPoint& p : symmetric)
    out.points.push_back({p.field_t, 1.0 / p.rsq_ohm - zero.sigma0_s});
  out.max_field_t = symmetric.back().field_t;
  return {true, {}};
}

namespace {

// |e_i| of point_noise_s for the inner points i with distinct neighbouring
// fields, with the index of the point each belongs to.
struct DifferenceResidual {
  std::size_t point = 0;
  double magnitude = 0.0;
};

std::vector<DifferenceResidual> difference_residuals(std::span<const DeltaSigmaPoint> points) {
  std::vector<DifferenceResidual> e;
  if (points.size() >= 3) e.reserve(points.size() - 2);
  for (std::size_t i = 1; i + 1 < points.size(); ++i) {
    const double b0 = points[i - 1].field_t, b1 = points[i].field_t, b2 = points[i + 1].field_t;
    if (!(b2 > b0)) continue;  // repeated fields: no line through the neighbours
    const double a = (b2 - b1) / (b2 - b0);
    const double b = 1.0 - a;
    const double r =
        a * points[i - 1].delta_sigma_s + b * points[i + 1].delta_sigma_s - points[i].delta_sigma_s;
    e.push_back({i, std::fabs(r) / std::sqrt(a * a + b * b + 1.0)});
  }
  return e;
}

// 1.4826 * the median of v (reordered); v not empty.
double robust_scale(std::vector<double>& v) {
  const auto mid = v.begin() + static_cast<std::ptrdiff_t>(v.size() / 2);
  std::nth_element(v.begin(), mid, v.end());
  double median = *mid;
  if (v.size() % 2 == 0) median = 0.5 * (median + *std::max_element(v.begin(), mid));
  return 1.4826 * median;
}

}  // namespace

double point_noise_s(std::span<const DeltaSigmaPoint> points) {
  const std::vector<DifferenceResidual> e = difference_residuals(points);
  if (e.empty()) return 0.0;
  std::vector<double> magnitudes(e.size());
  for (std::size_t k = 0; k < e.size(); ++k) magnitudes[k] = e[k].magnitude;
  return robust_scale(magnitudes);
}

std::vector<double> point_noise_profile_s(std::span<const DeltaSigmaPoint> points,
                                          std::size_t half_width) {
  std::vector<double> profile(points.size(), 0.0);
  const std::vector<DifferenceResidual> e = difference_residuals(points);
  if (e.empty() || half_width == 0) return profile;
  const std::size_t width = std::min(e.size(), 2 * half_width + 1);
  std::vector<double> window(width);
  // Residual k sits at point e[k].point; point i takes the window centred on
  // the first residual at or after it, shifted inward to stay inside.
  std::size_t k = 0;
  for (std::size_t i = 0; i < points.size(); ++i) {
    while (k + 1 < e.size() && e[k].point < i) ++k;
    const std::size_t first =
        std::min(k >= half_width ? k - half_width : std::size_t{0}, e.size() - width);
    for (std::size_t j = 0; j < width; ++j) window[j] = e[first + j].magnitude;
    profile[i] = robust_scale(window);
  }
  return profile;
}


namespace {

// The residual of leg[i] from the least-squares quadratic in B through up to
// three neighbours on each side (skipping index `skip`), divided by its
// standard deviation for unit noise. NaN when there are fewer than two
// neighbours on a side or the neighbours' fields do not determine a quadratic.
double spike_residual(std::span<const FieldPoint> leg, std::size_t i, std::size_t skip) {
  std::vector<std::size_t> near;
  std::size_t below = 0, above = 0;
  for (std::size_t j = i, taken = 0; j > 0 && taken < 3;) {
    --j;
    if (j == skip) continue;
    near.push_back(j);
    ++taken;
    ++below;
  }
  for (std::size_t j = i + 1, taken = 0; j < leg.size() && taken < 3; ++j) {
    if (j == skip) continue;
    near.push_back(j);
    ++taken;
    ++above;
  }
  if (below < 2 || above < 2) return kNaN;
  double scale = 0.0;
  for (std::size_t j : near) scale = std::max(scale, std::abs(leg[j].field_t - leg[i].field_t));
  if (!(scale > 0.0)) return kNaN;
  double m[3][3] = {}, v[3] = {};
  for (std::size_t j : near) {
    const double u = (leg[j].field_t - leg[i].field_t) / scale;
    const double p[3] = {1.0, u, u * u};
    for (int r = 0; r < 3; ++r) {
      for (int q = 0; q < 3; ++q) m[r][q] += p[r] * p[q];
      v[r] += p[r] * leg[j].value;
    }
  }
  const double det = m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1]) -
                     m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0]) +
                     m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0]);
  if (!(std::abs(det) > 1e-12)) return kNaN;
  // The first row of the inverse gives the value at u = 0 and its variance.
  const double i00 = (m[1][1] * m[2][2] - m[1][2] * m[2][1]) / det;
  const double i01 = -(m[0][1] * m[2][2] - m[0][2] * m[2][1]) / det;
  const double i02 = (m[0][1] * m[1][2] - m[0][2] * m[1][1]) / det;
  const double predicted = i00 * v[0] + i01 * v[1] + i02 * v[2];
  return (leg[i].value - predicted) / std::sqrt(1.0 + i00);
}

}  // namespace

SpikeRejection reject_spikes(std::span<const FieldPoint> leg, double threshold) {
  SpikeRejection out;
  const std::size_t none = leg.size();
  std::vector<double> residual(leg.size(), kNaN);
  std::vector<double> magnitudes, values;
  for (std::size_t i = 0; i < leg.size(); ++i) {
    residual[i] = spike_residual(leg, i, none);
    if (std::isfinite(residual[i])) magnitudes.push_back(std::abs(residual[i]));
    if (std::isfinite(leg[i].value)) values.push_back(std::abs(leg[i].value));
  }
  if (magnitudes.size() < 5) {
    out.kept.assign(leg.begin(), leg.end());
    return out;
  }
  const double floor = 1e-9 * robust_scale(values) / 1.4826;
  out.noise_scale = std::max(robust_scale(magnitudes), floor);
  const double limit = threshold * out.noise_scale;
  for (std::size_t i = 0; i < leg.size(); ++i) {
    const double e = residual[i];
    bool spike = std::isfinite(e) && std::abs(e) > limit;
    if (spike) {
      // Its neighbours, refitted without it, must not follow it.
      for (std::size_t j : {i - 1, i + 1}) {
        if (i == 0 || j >= leg.size()) continue;
        const double ej = spike_residual(leg, j, i);
        if (std::isfinite(ej) && std::abs(ej) >= std::abs(e) / 3.0) spike = false;
      }
    }
    if (spike)
      out.dropped.push_back(i);
    else
      out.kept.push_back(leg[i]);
  }
  return out;
}

}  // namespace lphi::conductance
