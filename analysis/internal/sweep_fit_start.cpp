// Start values of the sweep fit (analysis/internal/sweep_fit_start.hpp).
#include "analysis/internal/sweep_fit_start.hpp"

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <cstddef>
#include <vector>

#include "analysis/internal/special_functions.hpp"
#include "analysis/magnetoconductance.hpp"

namespace lphi::fit::detail {
namespace {

constexpr std::size_t kGridSubsample = 64;

// Linear least squares for the parameters that enter linearly (alpha when
// free, offset, background) with the lengths held, over the points `index`.
struct LinearSolution {
  double ssr = kInf;
  double alpha = 1, offset = 0, background = 0, odd = 0;
};

LinearSolution solve_linear(const Shape& shape, const Layout& l, const Data& d,
                            const std::vector<std::size_t>& index, double lphi_m, double lso_m) {
  const bool alpha_free = l.alpha >= 0;
  const int n_lin = (alpha_free ? 1 : 0) + (l.offset >= 0 ? 1 : 0) + (l.background >= 0 ? 1 : 0) +
                    (l.odd >= 0 ? 1 : 0);
  const double alpha = alpha_free ? 1.0 : l.alpha_held;
  std::vector<double> basis(index.size());
  if (shape.model == mc::Model::hln2d) {
    // As evaluate_hln: x = B_phi/|B| and ln x from the per-sweep terms.
    const double ln_b_phi = std::log(mc::characteristic_field_t(lphi_m));
    const double b_phi = std::exp(ln_b_phi);
    for (std::size_t k = 0; k < index.size(); ++k) {
      const std::size_t i = index[k];
      basis[k] = alpha * special::wl_bracket(b_phi * d.inverse_field[i],
                                             ln_b_phi + d.ln_inverse_field[i]);
    }
  } else {
    for (std::size_t k = 0; k < index.size(); ++k)
      basis[k] = shape.value(d.field_t[index[k]], lphi_m, lso_m, alpha);
  }

  // The design row of point k (unused entries stay 0, so the fixed-size sums
  // below leave them out) and the target it is fitted to.
  auto columns = [&](std::size_t k, double* x) {
    int c = 0;
    const double b = d.field_t[index[k]];
    if (alpha_free) x[c++] = basis[k];
    if (l.offset >= 0) x[c++] = 1.0;
    if (l.background >= 0) x[c++] = b * b;
    if (l.odd >= 0) x[c++] = b;
  };
  auto target = [&](std::size_t k) { return d.y[index[k]] - (alpha_free ? 0.0 : basis[k]); };
  Eigen::Matrix4d normal = Eigen::Matrix4d::Zero();
  Eigen::Vector4d rhs = Eigen::Vector4d::Zero();
  for (std::size_t k = 0; k < index.size(); ++k) {
    Eigen::Vector4d x = Eigen::Vector4d::Zero();
    columns(k, x.data());
    const double w2 = d.weight[index[k]] * d.weight[index[k]];
    rhs += (w2 * target(k)) * x;
    normal += (w2 * x) * x.transpose();
  }
  Eigen::Vector4d coef = Eigen::Vector4d::Zero();
  if (n_lin > 0) {
    const auto block = normal.topLeftCorner(n_lin, n_lin);
    Eigen::VectorXd solved = block.ldlt().solve(rhs.head(n_lin));
    if (!solved.allFinite()) return {};
    coef.head(n_lin) = solved;
  }
  LinearSolution s;
  int c = 0;
  s.alpha = alpha_free ? coef[c++] : l.alpha_held;
  if (l.offset >= 0) s.offset = coef[c++];
  if (l.background >= 0) s.background = coef[c++];
  if (l.odd >= 0) s.odd = coef[c++];
  s.ssr = 0.0;
  for (std::size_t k = 0; k < index.size(); ++k) {
    Eigen::Vector4d x = Eigen::Vector4d::Zero();
    columns(k, x.data());
    const double e = d.weight[index[k]] * (target(k) - coef.dot(x));
    s.ssr += e * e;
  }
  if (!std::isfinite(s.ssr)) s.ssr = kInf;
  return s;
}

void store_linear(const Layout& l, const LinearSolution& s, double* theta) {
  if (l.alpha >= 0) theta[l.alpha] = s.alpha;
  if (l.offset >= 0) theta[l.offset] = s.offset;
  if (l.background >= 0) theta[l.background] = s.background;
  if (l.odd >= 0) theta[l.odd] = s.odd;
}

// At most m indices spread evenly over 0 .. n-1 (all of them when n <= m).
std::vector<std::size_t> subsample(std::size_t n, std::size_t m) {
  std::vector<std::size_t> index;
  m = std::min(n, m);
  for (std::size_t k = 0; k < m; ++k)
    index.push_back(m > 1 ? (k * (n - 1) + (m - 1) / 2) / (m - 1) : 0);
  index.erase(std::unique(index.begin(), index.end()), index.end());
  return index;
}

// Vertex of the parabola through (-1, a), (0, b), (1, c), clamped to [-1, 1].
double parabola_vertex(double a, double b, double c) {
  const double curvature = a - 2.0 * b + c;
  if (!(curvature > 0.0) || !std::isfinite(curvature)) return 0.0;
  return std::clamp(0.5 * (a - c) / curvature, -1.0, 1.0);
}

}  // namespace

std::vector<double> grid_start(const Shape& shape, const Layout& l, const Data& d, double field_lo,
                               double field_hi) {
  const std::vector<std::size_t> sub = subsample(d.size(), kGridSubsample);

  std::vector<double> log_field;
  for (double f = 0.5 * field_lo; f <= 2.0 * field_hi * 1.0000001; f *= 2.0)
    log_field.push_back(std::log(f));
  if (log_field.size() < 3) {
    const double mid = std::log(std::sqrt(field_lo * field_hi));
    log_field = {mid - std::log(2.0), mid, mid + std::log(2.0)};
  }
  const std::size_t g = log_field.size();
  const std::size_t g_so = shape.has_lso() ? g : 1;

  auto ssr_at = [&](double log_field_phi, double log_field_so) {
    const double lphi = shape.length_of_field(std::exp(log_field_phi));
    const double lso = shape.has_lso() ? shape.length_of_field(std::exp(log_field_so)) : 0.0;
    return solve_linear(shape, l, d, sub, lphi, lso).ssr;
  };

  std::vector<double> table(g * g_so, kInf);
  std::size_t best = 0;
  for (std::size_t i = 0; i < g; ++i)
    for (std::size_t j = 0; j < g_so; ++j) {
      table[i * g_so + j] = ssr_at(log_field[i], log_field[j]);
      if (table[i * g_so + j] < table[best]) best = i * g_so + j;
    }
  const std::size_t bi = best / g_so, bj = best % g_so;
  const double step = std::log(2.0);
  double log_phi = log_field[bi];
  double log_so = log_field[bj];
  if (bi > 0 && bi + 1 < g)
    log_phi += step * parabola_vertex(table[(bi - 1) * g_so + bj], table[best],
                                      table[(bi + 1) * g_so + bj]);
  if (shape.has_lso() && bj > 0 && bj + 1 < g_so)
    log_so +=
        step * parabola_vertex(table[bi * g_so + bj - 1], table[best], table[bi * g_so + bj + 1]);
  // Keep the refinement only if it does not make things worse.
  if (ssr_at(log_phi, log_so) > table[best]) {
    log_phi = log_field[bi];
    log_so = log_field[bj];
  }

  std::vector<double> theta(static_cast<std::size_t>(l.size), 0.0);
  const double lphi = shape.length_of_field(std::exp(log_phi));
  const double lso = shape.has_lso() ? shape.length_of_field(std::exp(log_so)) : 0.0;
  theta[static_cast<std::size_t>(l.ln_lphi)] = std::log(lphi);
  if (l.ln_lso >= 0) theta[static_cast<std::size_t>(l.ln_lso)] = std::log(lso);
  store_linear(l, solve_linear(shape, l, d, sub, lphi, lso), theta.data());
  return theta;
}

std::vector<double> relayout(const Shape& shape, const Layout& from, const Layout& to,
                             const Data& d, const std::vector<double>& theta) {
  const Values v = unpack(from, theta.data());
  std::vector<double> out(static_cast<std::size_t>(to.size), 0.0);
  out[static_cast<std::size_t>(to.ln_lphi)] = std::log(v.lphi_m);
  if (to.ln_lso >= 0) out[static_cast<std::size_t>(to.ln_lso)] = std::log(v.lso_m);
  store_linear(to,
               solve_linear(shape, to, d, subsample(d.size(), kGridSubsample), v.lphi_m, v.lso_m),
               out.data());
  return out;
}

}  // namespace lphi::fit::detail
