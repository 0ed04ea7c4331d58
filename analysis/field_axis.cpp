#include "analysis/field_axis.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

#include <fmt/format.h>

#include "analysis/internal/cubic_interpolation.hpp"

namespace lphi::field_axis {
namespace {

std::string mt(double field_t) { return fmt::format("{:.3g} mT", field_t * 1e3); }

double median_of(std::vector<double> v) {
  if (v.empty()) return kUnknown;
  const auto mid = v.begin() + static_cast<std::ptrdiff_t>(v.size() / 2);
  std::nth_element(v.begin(), mid, v.end());
  double m = *mid;
  if (v.size() % 2 == 0) m = 0.5 * (m + *std::max_element(v.begin(), mid));
  return m;
}

// The median step between distinct sorted fields.
double median_step(const std::vector<double>& sorted) {
  std::vector<double> steps;
  for (std::size_t i = 1; i < sorted.size(); ++i)
    if (sorted[i] > sorted[i - 1]) steps.push_back(sorted[i] - sorted[i - 1]);
  return median_of(std::move(steps));
}

// The mirrored differences of a leg about trial centres, on a fixed grid
// b_k = k h, k = 1..K, with their least-squares line in b removed.
class Mirror {
 public:
  Mirror(std::vector<double> x, std::vector<double> y, double step, std::size_t k)
      : x_(std::move(x)), y_(std::move(y)) {
    b_.reserve(k);
    for (std::size_t i = 1; i <= k; ++i) b_.push_back(static_cast<double>(i) * step);
  }

  std::size_t size() const { return b_.size(); }

  // S(c): the sum of squares of the differences left after their line through
  // the origin (d(0) = 0 by construction; an odd part is 2 beta b), each
  // difference divided by its noise variance for unit reading noise (a
  // difference between two readings has 2, between two values interpolated
  // at mid-step 2 * 0.64), so that the noise contributes the same to every
  // trial centre and S / (K - 3) estimates the readings' noise variance.
  double residual_sum(double c) const {
    double sbb = 0, sbd = 0, sdd = 0;
    for (double b : b_) {
      const detail::CubicStencil plus = detail::cubic_stencil(x_, c + b);
      const detail::CubicStencil minus = detail::cubic_stencil(x_, c - b);
      const double d = detail::apply_stencil(plus, y_) - detail::apply_stencil(minus, y_);
      const double w = 1.0 / noise_variance(plus, minus);
      sbb += w * b * b;
      sbd += w * b * d;
      sdd += w * d * d;
    }
    return std::max(0.0, sdd - sbd * sbd / sbb);
  }

  // The factor by which the differences' sharing of readings (through the
  // interpolation) inflates var(c) over s_d^2 / G: with z_k = d_k / sqrt(v_k)
  // the normalized differences, g_k = dz_k/dc (less its projection on the
  // removed line) and a_k their reading weights, the estimate moves by
  // g^T z / g^T g, whose variance is sigma^2 |sum_k g_k a_k / sqrt(v_k)|^2 /
  // (g^T g)^2 against sigma^2 / g^T g for independent differences. g is taken
  // by central differences over +-dc (a few field steps, smoothing the
  // readings' noise out of it).
  double correlation_inflation(double c, double dc) const {
    const std::size_t k = b_.size();
    std::vector<double> g(k), scale(k), bt(k);
    double gb = 0.0, bb = 0.0;
    for (std::size_t i = 0; i < k; ++i) {
      const double b = b_[i];
      const detail::CubicStencil plus = detail::cubic_stencil(x_, c + b);
      const detail::CubicStencil minus = detail::cubic_stencil(x_, c - b);
      scale[i] = 1.0 / std::sqrt(noise_variance(plus, minus));
      auto d_at = [&](double cc) {
        return detail::apply_stencil(detail::cubic_stencil(x_, cc + b), y_) -
               detail::apply_stencil(detail::cubic_stencil(x_, cc - b), y_);
      };
      g[i] = scale[i] * (d_at(c + dc) - d_at(c - dc)) / (2.0 * dc);
      bt[i] = scale[i] * b;
      gb += g[i] * bt[i];
      bb += bt[i] * bt[i];
    }
    double gg = 0.0;
    std::vector<double> total(x_.size(), 0.0);
    for (std::size_t i = 0; i < k; ++i) {
      g[i] -= gb / bb * bt[i];
      gg += g[i] * g[i];
      const double b = b_[i];
      const detail::CubicStencil plus = detail::cubic_stencil(x_, c + b);
      const detail::CubicStencil minus = detail::cubic_stencil(x_, c - b);
      const double f = g[i] * scale[i];
      for (std::size_t j = 0; j < plus.count; ++j) total[plus.first + j] += f * plus.weight[j];
      for (std::size_t j = 0; j < minus.count; ++j) total[minus.first + j] -= f * minus.weight[j];
    }
    double sum = 0.0;
    for (double t : total) sum += t * t;
    return gg > 0.0 ? std::max(1.0, sum / gg) : 1.0;
  }

 private:
  // sum of the squared weights of plus - minus (the stencils may share readings).
  static double noise_variance(const detail::CubicStencil& plus, const detail::CubicStencil& minus) {
    double v = 0.0;
    for (std::size_t j = 0; j < plus.count; ++j) {
      double w = plus.weight[j];
      const std::size_t at = plus.first + j;
      if (at >= minus.first && at < minus.first + minus.count) w -= minus.weight[at - minus.first];
      v += w * w;
    }
    for (std::size_t j = 0; j < minus.count; ++j) {
      const std::size_t at = minus.first + j;
      if (at >= plus.first && at < plus.first + plus.count) continue;
      v += minus.weight[j] * minus.weight[j];
    }
    return v > 0.0 ? v : 1.0;
  }

  std::vector<double> x_, y_, b_;
};

struct Parabola {
  bool ok = false;
  double vertex = 0.0;
  double curvature = 0.0;  // G in S = S0 + G (c - vertex)^2
  double scatter_vertex_var = 0.0;  // var(vertex) from S's scatter about the parabola
};

// Least-squares parabola through (c_i, S_i). S also carries a ripple on the
// scale of one field step (the interpolation moving between readings, each
// with its noise); its scatter about the parabola, with the trials within one
// step counted as one (n_independent in all), gives the variance of the vertex
// that the ripple adds: var(a1) / (2 a2)^2 in the scaled variable.
Parabola fit_parabola(const std::vector<double>& c, const std::vector<double>& s,
                      double n_independent) {
  const double c0 = c[c.size() / 2];
  double scale = 0.0;
  for (double v : c) scale = std::max(scale, std::abs(v - c0));
  if (!(scale > 0.0) || c.size() < 4) return {};
  double xtx[3][3] = {}, xty[3] = {};
  for (std::size_t i = 0; i < c.size(); ++i) {
    const double u = (c[i] - c0) / scale;
    const double p[3] = {1.0, u, u * u};
    for (int r = 0; r < 3; ++r) {
      for (int q = 0; q < 3; ++q) xtx[r][q] += p[r] * p[q];
      xty[r] += p[r] * s[i];
    }
  }
  // The inverse of X^T X by cofactors (3x3, symmetric).
  const double det = xtx[0][0] * (xtx[1][1] * xtx[2][2] - xtx[1][2] * xtx[2][1]) -
                     xtx[0][1] * (xtx[1][0] * xtx[2][2] - xtx[1][2] * xtx[2][0]) +
                     xtx[0][2] * (xtx[1][0] * xtx[2][1] - xtx[1][1] * xtx[2][0]);
  if (!(std::abs(det) > 0.0)) return {};
  double inv[3][3];
  for (int r = 0; r < 3; ++r)
    for (int q = 0; q < 3; ++q) {
      const int r1 = (q + 1) % 3, r2 = (q + 2) % 3, q1 = (r + 1) % 3, q2 = (r + 2) % 3;
      inv[r][q] = (xtx[r1][q1] * xtx[r2][q2] - xtx[r1][q2] * xtx[r2][q1]) / det;
    }
  double a[3] = {};
  for (int r = 0; r < 3; ++r)
    for (int q = 0; q < 3; ++q) a[r] += inv[r][q] * xty[q];
  if (!(a[2] > 0.0)) return {};
  double ssr = 0.0;
  for (std::size_t i = 0; i < c.size(); ++i) {
    const double u = (c[i] - c0) / scale;
    const double r = s[i] - (a[0] + a[1] * u + a[2] * u * u);
    ssr += r * r;
  }
  const double n = static_cast<double>(c.size());
  const double dof_inflation = n / std::max(1.0, std::min(n, n_independent));
  const double var_a1 = ssr / std::max(1.0, n - 3.0) * inv[1][1] * dof_inflation;
  Parabola out;
  out.ok = true;
  out.vertex = c0 - a[1] / (2.0 * a[2]) * scale;
  out.curvature = a[2] / (scale * scale);
  out.scatter_vertex_var = var_a1 / (4.0 * a[2] * a[2]) * scale * scale;
  return out;
}

Centre refuse(std::string reason) {
  Centre c;
  c.reason = std::move(reason);
  return c;
}

// |dB/dt| near zero field: a least-squares line of B against t over the
// readings with |B| <= reach (at least the 5 nearest zero).
double rate_near_zero(std::span<const LegPoint> leg, double reach_t) {
  std::vector<std::size_t> order(leg.size());
  for (std::size_t i = 0; i < leg.size(); ++i) order[i] = i;
  std::sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
    return std::abs(leg[a].field_t) < std::abs(leg[b].field_t);
  });
  std::size_t n = 0;
  while (n < order.size() && std::abs(leg[order[n]].field_t) <= reach_t) ++n;
  n = std::min(order.size(), std::max<std::size_t>(n, 5));
  double st = 0, sb = 0;
  for (std::size_t i = 0; i < n; ++i) {
    const LegPoint& p = leg[order[i]];
    if (!std::isfinite(p.t_s)) return kUnknown;
    st += p.t_s;
    sb += p.field_t;
  }
  const double nn = static_cast<double>(n);
  const double tm = st / nn, bm = sb / nn;
  double stt = 0, stb = 0;
  for (std::size_t i = 0; i < n; ++i) {
    const LegPoint& p = leg[order[i]];
    stt += (p.t_s - tm) * (p.t_s - tm);
    stb += (p.t_s - tm) * (p.field_t - bm);
  }
  if (!(stt > 0.0)) return kUnknown;
  return std::abs(stb / stt);
}

}  // namespace

namespace {

// The centre of symmetry of a sorted curve (distinct fields, both signs of
// B, enough readings on each side: find_centre checks). Without the rate and
// direction, which need the leg's times.
Centre centre_of_curve(const std::vector<double>& x, const std::vector<double>& y) {
  const double reach = std::min(-x.front(), x.back());
  const double step = median_step(x);
  // Trial centres within +-reach/4, differences out to 3 reach/4 from each:
  // about a smooth stretch of the curve the differences are linear in b
  // (d = 2 f'(c) b + O(b^3)) and vanish with the line, so the cusp must lie
  // well inside the differences' reach for every trial centre.
  const auto k = static_cast<std::size_t>(std::floor(0.75 * reach / step));
  if (k < kMinPointsPerSide)
    return refuse("the leg reaches only " + mt(reach) + " on its shorter side, " +
                  fmt::format("{:.1f}", reach / step) +
                  " field steps: too few to find the centre of symmetry");
  const Mirror mirror(x, y, step, k);

  const double half_range = 0.25 * reach;
  const double grid_step = std::max(0.5 * step, 2.0 * half_range / 2000.0);
  const auto n_grid = static_cast<std::size_t>(std::floor(2.0 * half_range / grid_step)) + 1;
  std::vector<double> grid_c(n_grid), grid_s(n_grid);
  std::size_t best = 0;
  for (std::size_t j = 0; j < n_grid; ++j) {
    grid_c[j] = -half_range + static_cast<double>(j) * grid_step;
    grid_s[j] = mirror.residual_sum(grid_c[j]);
    if (grid_s[j] < grid_s[best]) best = j;
  }
  const double dof = static_cast<double>(k) - 2.0;
  const std::string flat =
      "no curvature to centre on: the leg's readings show no cusp above their noise";
  if (best == 0 || best + 1 == n_grid)
    return refuse(flat + " (the mirrored differences are smallest at the end of the range, " +
                  mt(grid_c[best]) + ")");

  // A flat sweep: across the range of trial centres the mirrored differences
  // grow by no more than the noise makes the smallest of many trials fall
  // below their mean (a few times sqrt(2 K) noise variances).
  {
    const std::size_t outer = std::max<std::size_t>(1, n_grid / 10);
    double sum = 0.0;
    for (std::size_t j = 0; j < outer; ++j) sum += grid_s[j] + grid_s[n_grid - 1 - j];
    const double rise = (sum / (2.0 * static_cast<double>(outer)) - grid_s[best]) /
                        std::max(grid_s[best] / dof, std::numeric_limits<double>::min());
    const double needed = std::max(25.0, 8.0 * std::sqrt(2.0 * static_cast<double>(k)));
    if (rise < needed)
      return refuse(flat + fmt::format(" (across trial centres within +-{} the mirrored "
                                       "differences grow by {:.0f} noise variances, {:.0f} needed)",
                                       mt(half_range), rise, needed));
  }

  // First estimate: the parabola through the best trial and its neighbours.
  double centre = grid_c[best];
  {
    const double sm = grid_s[best - 1], s0 = grid_s[best], sp = grid_s[best + 1];
    const double denom = sm - 2.0 * s0 + sp;
    if (denom > 0.0) centre += 0.5 * grid_step * (sm - sp) / denom;
  }
  double curvature = (grid_s[best - 1] - 2.0 * grid_s[best] + grid_s[best + 1]) /
                     (2.0 * grid_step * grid_step);
  double inflation = mirror.correlation_inflation(centre, 2.0 * step);
  double variance = mirror.residual_sum(centre) / dof;
  double err = curvature > 0.0 ? std::sqrt(variance * inflation / curvature) : kUnknown;
  if (!std::isfinite(err)) return refuse(flat);

  // Refine: a least-squares parabola over +-3 standard errors (at least one
  // grid step), recentred until its vertex stays inside the middle half.
  for (int pass = 0; pass < 4; ++pass) {
    const double half_width = std::min(std::max(3.0 * err, 2.0 * step), half_range);
    std::vector<double> cs, ss;
    for (int i = -20; i <= 20; ++i) {
      const double c = centre + half_width * i / 20.0;
      if (c < -half_range || c > half_range) continue;
      cs.push_back(c);
      ss.push_back(mirror.residual_sum(c));
    }
    if (cs.size() < 5) break;
    const Parabola p = fit_parabola(cs, ss, 2.0 * half_width / step);
    if (!p.ok) break;
    const bool settled = std::abs(p.vertex - centre) <= 0.5 * half_width;
    centre = std::clamp(p.vertex, -half_range, half_range);
    curvature = p.curvature;
    inflation = mirror.correlation_inflation(centre, 2.0 * step);
    variance = mirror.residual_sum(centre) / dof;
    err = std::sqrt(variance * inflation / curvature + p.scatter_vertex_var);
    if (settled) break;
  }
  if (!std::isfinite(err) || !(curvature > 0.0)) return refuse(flat);
  if (err > 0.1 * reach)
    return refuse(flat + " (the centre would be uncertain by " + mt(err) + " on a reach of " +
                  mt(reach) + ")");

  Centre out;
  out.ok = true;
  out.centre_t = centre;
  out.centre_err_t = err;
  out.n_differences = k;
  return out;
}

// A curve of more than kMaxCentringPoints readings is centred on its means
// over kMaxCentringPoints equal field bins (the cost of the search grows as
// the square of the points; the bins average the noise down, and a bin is
// far narrower than any cusp a sweep of that many readings resolves).
void bin_curve(std::vector<double>& x, std::vector<double>& y) {
  if (x.size() <= kMaxCentringPoints) return;
  const double lo = x.front(), width = (x.back() - x.front()) / static_cast<double>(kMaxCentringPoints);
  std::vector<double> bx, by;
  double sx = 0.0, sy = 0.0, n = 0.0;
  std::size_t bin = 0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    const auto b = std::min(kMaxCentringPoints - 1, static_cast<std::size_t>((x[i] - lo) / width));
    if (b != bin && n > 0.0) {
      bx.push_back(sx / n);
      by.push_back(sy / n);
      sx = sy = n = 0.0;
    }
    bin = b;
    sx += x[i];
    sy += y[i];
    n += 1.0;
  }
  if (n > 0.0) {
    bx.push_back(sx / n);
    by.push_back(sy / n);
  }
  x = std::move(bx);
  y = std::move(by);
}

}  // namespace

Centre find_centre(std::span<const LegPoint> leg) {
  for (std::size_t i = 0; i < leg.size(); ++i) {
    if (!std::isfinite(leg[i].field_t) || !std::isfinite(leg[i].value))
      return refuse(fmt::format("reading {} of the leg has a non-finite field or value", i));
  }
  if (leg.size() < 2 * kMinPointsPerSide)
    return refuse(fmt::format("the leg has {} readings; at least {} are needed to centre it",
                              leg.size(), 2 * kMinPointsPerSide));

  // The curve sorted by field, readings repeated at one field averaged.
  std::vector<std::size_t> order(leg.size());
  for (std::size_t i = 0; i < leg.size(); ++i) order[i] = i;
  std::stable_sort(order.begin(), order.end(),
                   [&](std::size_t a, std::size_t b) { return leg[a].field_t < leg[b].field_t; });
  std::vector<double> x, y;
  double repeats = 0.0;
  for (std::size_t i : order) {
    if (!x.empty() && x.back() == leg[i].field_t) {
      repeats += 1.0;
      y.back() += (leg[i].value - y.back()) / repeats;
    } else {
      x.push_back(leg[i].field_t);
      y.push_back(leg[i].value);
      repeats = 1.0;
    }
  }
  const auto n_negative = static_cast<std::size_t>(
      std::count_if(x.begin(), x.end(), [](double b) { return b < 0.0; }));
  const auto n_positive = static_cast<std::size_t>(
      std::count_if(x.begin(), x.end(), [](double b) { return b > 0.0; }));
  if (n_negative == 0 || n_positive == 0)
    return refuse("the leg does not cross zero field (readings from " + mt(x.front()) + " to " +
                  mt(x.back()) + ")");
  if (n_negative < kMinPointsPerSide || n_positive < kMinPointsPerSide)
    return refuse(fmt::format(
        "too few readings to centre the leg: {} below and {} above zero field (at least {} "
        "needed on each side)",
        n_negative, n_positive, kMinPointsPerSide));

  bin_curve(x, y);
  Centre out = centre_of_curve(x, y);
  if (!out.ok) return out;
  // The error from the curvature of S understates the scatter of the centre
  // when one field step changes the curve by less than the noise (a cusp
  // much wider than the step: B_phi a sizeable part of the sweep). The two
  // interleaved halves of the readings give two independent centres whose
  // half difference has the full estimate's standard deviation; the larger
  // of the two errors is quoted (a single such difference is itself
  // uncertain, so this errs on the side of a larger error).
  if (x.size() >= 8 * kMinPointsPerSide) {
    std::vector<double> xe, ye, xo, yo;
    for (std::size_t i = 0; i < x.size(); ++i) {
      (i % 2 == 0 ? xe : xo).push_back(x[i]);
      (i % 2 == 0 ? ye : yo).push_back(y[i]);
    }
    const Centre even = centre_of_curve(xe, ye), odd = centre_of_curve(xo, yo);
    if (even.ok && odd.ok)
      out.centre_err_t = std::max(out.centre_err_t, 0.5 * std::abs(even.centre_t - odd.centre_t));
  }
  const double reach = std::min(-x.front(), x.back());
  out.rate_t_per_s = rate_near_zero(leg, 0.25 * reach);
  const double rise = leg.back().field_t - leg.front().field_t;
  out.direction = rise > 0.0 ? 1.0 : (rise < 0.0 ? -1.0 : 0.0);
  return out;
}

Split split(const Centre& up, const Centre& down) {
  Split s;
  if (!up.ok || !down.ok) return s;
  const double err = 0.5 * std::hypot(up.centre_err_t, down.centre_err_t);
  s.offset_t = 0.5 * (up.centre_t + down.centre_t);
  s.offset_err_t = err;
  s.remanent_field_t = -s.offset_t;
  s.opposite_t = 0.5 * (up.centre_t - down.centre_t);
  s.opposite_err_t = err;
  const bool up_known = std::isfinite(up.rate_t_per_s) && up.rate_t_per_s > 0.0;
  const bool down_known = std::isfinite(down.rate_t_per_s) && down.rate_t_per_s > 0.0;
  if (up_known && down_known)
    s.rate_t_per_s = 0.5 * (up.rate_t_per_s + down.rate_t_per_s);
  else if (up_known)
    s.rate_t_per_s = up.rate_t_per_s;
  else if (down_known)
    s.rate_t_per_s = down.rate_t_per_s;
  if (std::isfinite(s.rate_t_per_s)) {
    s.delay_s = s.opposite_t / s.rate_t_per_s;
    s.delay_err_s = s.opposite_err_t / s.rate_t_per_s;
  }
  return s;
}

RateCheck rate_check(double rate_t_per_s, double time_constant_s, double b_phi_t) {
  RateCheck r;
  if (!(rate_t_per_s > 0.0) || !(time_constant_s > 0.0) || !(b_phi_t > 0.0) ||
      !std::isfinite(rate_t_per_s) || !std::isfinite(time_constant_s) || !std::isfinite(b_phi_t))
    return r;
  r.known = true;
  r.shift_t = rate_t_per_s * time_constant_s;
  r.max_rate_t_per_s = kMaxLagFractionOfBphi * b_phi_t / time_constant_s;
  r.too_fast = r.shift_t > kMaxLagFractionOfBphi * b_phi_t;
  return r;
}

Coverage coverage_before(std::span<const std::vector<double>> legs, const CoverageOptions& o) {
  Coverage c;
  std::vector<double> all;
  double typical_step = 0.0;
  for (const std::vector<double>& leg : legs) {
    std::vector<double> sorted = leg;
    std::sort(sorted.begin(), sorted.end());
    const double h = median_step(sorted);
    if (std::isfinite(h)) typical_step = std::max(typical_step, h);
    all.insert(all.end(), sorted.begin(), sorted.end());
  }
  std::sort(all.begin(), all.end());
  if (all.empty()) {
    c.ok = false;
    c.reason = "no-readings";
    c.sentence = "the sweep has no readings";
    c.advice = "record the sweep again";
    return c;
  }
  // The gap that contains zero field (from zero to the nearest reading when
  // every reading lies on one side).
  const auto above = std::upper_bound(all.begin(), all.end(), 0.0);
  const double low = above == all.begin() ? 0.0 : *(above - 1);
  const double high = above == all.end() ? 0.0 : *above;
  const double gap = high - low;
  if (typical_step > 0.0 && gap > o.hole_factor * typical_step) {
    c.ok = false;
    c.reason = "hole-across-zero";
    c.hole_low_t = low;
    c.hole_high_t = high;
    c.sentence = fmt::format(
        "the readings stop between {:+.1f} and {:+.1f} mT: no data across zero field (a gap of "
        "{:.0f} typical field steps of {})",
        low * 1e3, high * 1e3, gap / typical_step, mt(typical_step));
    c.advice = fmt::format("sweep through zero field again: the readings stop between {:+.1f} and "
                           "{:+.1f} mT",
                           low * 1e3, high * 1e3);
    return c;
  }
  const double reach = std::max(std::abs(all.front()), std::abs(all.back()));
  const double near = o.near_fraction * reach;
  c.n_near_zero = static_cast<std::size_t>(std::count_if(
      all.begin(), all.end(), [near](double b) { return std::abs(b) <= near; }));
  if (c.n_near_zero < o.min_near_zero) {
    c.ok = false;
    c.reason = "too-few-near-zero";
    c.sentence = fmt::format("too few readings near zero field: {} within +-{} (at least {} needed)",
                             c.n_near_zero, mt(near), o.min_near_zero);
    c.advice = fmt::format("take at least {} readings within +-{} of zero field", o.min_near_zero,
                           mt(near));
  }
  return c;
}

Coverage coverage_after(std::span<const std::vector<double>> legs, double b_phi_t,
                        const CoverageOptions& o) {
  Coverage c;
  if (!(b_phi_t > 0.0) || !std::isfinite(b_phi_t)) return c;
  const double near = 3.0 * b_phi_t;
  for (const std::vector<double>& leg : legs)
    c.n_near_zero += static_cast<std::size_t>(
        std::count_if(leg.begin(), leg.end(), [near](double b) { return std::abs(b) <= near; }));
  if (c.n_near_zero < o.min_within_3_bphi) {
    c.ok = false;
    c.reason = "cusp-not-resolved";
    c.sentence = fmt::format(
        "only {} readings lie within +-{} (3 B_phi) of zero field; at least {} are needed to "
        "resolve the cusp",
        c.n_near_zero, mt(near), o.min_within_3_bphi);
    const double legs_used = std::max<double>(1.0, static_cast<double>(legs.size()));
    c.advice = fmt::format("step the field by {} or less near zero field",
                           mt(2.0 * near * legs_used / static_cast<double>(o.min_within_3_bphi)));
  }
  return c;
}

}  // namespace lphi::field_axis
