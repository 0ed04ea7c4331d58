#include "analysis/sweep_fit.hpp"

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <limits>
#include <span>
#include <string>
#include <vector>

#include "analysis/constants.hpp"
#include "analysis/internal/special_functions.hpp"
#include "analysis/internal/sweep_fit_function.hpp"

namespace lphi::fit {
namespace {

using detail::Data;
using detail::Evaluations;
using detail::kE;
using detail::kHbar;
using detail::kInf;
using detail::Layout;
using detail::PassResult;
using detail::Shape;
using detail::tiny_solve;
using detail::Values;
using detail::unpack;

constexpr double kWl = si::wl_conductance_s;  // e^2/(pi h), the residual unit

// Thresholds; the header documents each of them.
constexpr double kNarrowWindowRatio = 2.0;
constexpr double kDegenerateCorrelation = 0.995;
constexpr double kThreeDimensionalSlack = 2.0;
constexpr std::size_t kMinWindowPoints = 10;
constexpr double kResolvedStepFraction = 0.25;
constexpr double kBoundFactor = 100.0;
constexpr int kMaxWindowPasses = 8;
constexpr double kWindowSettle = 0.05;
constexpr std::size_t kGridSubsample = 64;

Layout make_layout(const Shape& shape, bool alpha_free, double alpha_held, bool offset,
                   bool background) {
  Layout l;
  int next = 1;
  if (shape.has_lso()) l.ln_lso = next++;
  if (shape.model == mc::Model::hln2d && alpha_free) l.alpha = next++;
  if (offset) l.offset = next++;
  if (background) l.background = next++;
  l.size = next;
  l.alpha_held = alpha_held;
  return l;
}

// hbar/(4e), so that ln B_phi = ln(hbar/(4e)) - 2 ln L_phi.
const double kLnHbarOver4e = std::log(kHbar / (4.0 * kE));

// evaluate() for hln2d, the model most sweeps are fitted with, in the form
// of mc::hln2d_grad (alpha b(x), -2 alpha x b'(x), b(x)) but with x = B_phi/|B|
// and ln x from the per-sweep 1/|B| and ln|B|: one multiplication and one
// subtraction per point instead of a division and a logarithm.
void evaluate_hln(const Layout& l, const Data& d, const double* theta, double* residuals,
                  double* jacobian, std::span<special::BracketAndSlope> brackets) {
  const Values v = unpack(l, theta);
  const double ln_b_phi = kLnHbarOver4e - 2.0 * theta[l.ln_lphi];
  const std::size_t n = d.size();
  special::wl_bracket_and_log_slope(std::exp(ln_b_phi), ln_b_phi, d.inverse_field,
                                    d.ln_inverse_field, brackets.first(n));
  auto column = [&](int k) { return jacobian + static_cast<std::size_t>(k) * n; };
  double* const j_lphi = column(l.ln_lphi);
  double* const j_alpha = l.alpha >= 0 ? column(l.alpha) : nullptr;
  double* const j_offset = l.offset >= 0 ? column(l.offset) : nullptr;
  double* const j_background = l.background >= 0 ? column(l.background) : nullptr;
  const double* const field = d.field_t.data();
  for (std::size_t i = 0; i < n; ++i) {
    const special::BracketAndSlope s = brackets[i];
    const double w = d.weight[i];
    const double b2 = field[i] * field[i];
    residuals[i] = w * (v.alpha * s.value + v.offset + v.background * b2 - d.y[i]);
    j_lphi[i] = -2.0 * w * v.alpha * s.log_slope;
    if (j_alpha != nullptr) j_alpha[i] = w * s.value;
    if (j_offset != nullptr) j_offset[i] = w;
    if (j_background != nullptr) j_background[i] = w * b2;
  }
}

}  // namespace

namespace detail {

void evaluate(const Shape& shape, const Layout& l, const Data& d, const double* theta,
              double* residuals, double* jacobian, std::span<special::BracketAndSlope> scratch) {
  if (shape.model == mc::Model::hln2d) {
    evaluate_hln(l, d, theta, residuals, jacobian, scratch);
    return;
  }
  const Values v = unpack(l, theta);
  const std::size_t n = d.size();
  auto column = [&](int k) { return jacobian + static_cast<std::size_t>(k) * n; };
  double* const j_lphi = column(l.ln_lphi);
  double* const j_lso = l.ln_lso >= 0 ? column(l.ln_lso) : nullptr;
  double* const j_alpha = l.alpha >= 0 ? column(l.alpha) : nullptr;
  double* const j_offset = l.offset >= 0 ? column(l.offset) : nullptr;
  double* const j_background = l.background >= 0 ? column(l.background) : nullptr;
  for (std::size_t i = 0; i < n; ++i) {
    const double b = d.field_t[i];
    const double w = d.weight[i];
    const mc::ModelGradient g = shape.gradient(b, v.lphi_m, v.lso_m, v.alpha);
    residuals[i] = w * (g.value + v.offset + v.background * b * b - d.y[i]);
    j_lphi[i] = w * g.d_ln_lphi;
    if (j_lso != nullptr) j_lso[i] = w * g.d_ln_lso;
    if (j_alpha != nullptr) j_alpha[i] = w * g.d_alpha;
    if (j_offset != nullptr) j_offset[i] = w;
    if (j_background != nullptr) j_background[i] = w * b * b;
  }
}

}  // namespace detail

namespace {

// Linear least squares for the parameters that enter linearly (alpha when
// free, offset, background) with the lengths held, over the points `index`.
struct LinearSolution {
  double ssr = kInf;
  double alpha = 1, offset = 0, background = 0;
};

LinearSolution solve_linear(const Shape& shape, const Layout& l, const Data& d,
                            const std::vector<std::size_t>& index, double lphi_m, double lso_m) {
  const bool alpha_free = l.alpha >= 0;
  const int n_lin = (alpha_free ? 1 : 0) + (l.offset >= 0 ? 1 : 0) + (l.background >= 0 ? 1 : 0);
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
  };
  auto target = [&](std::size_t k) { return d.y[index[k]] - (alpha_free ? 0.0 : basis[k]); };
  Eigen::Matrix3d normal = Eigen::Matrix3d::Zero();
  Eigen::Vector3d rhs = Eigen::Vector3d::Zero();
  for (std::size_t k = 0; k < index.size(); ++k) {
    Eigen::Vector3d x = Eigen::Vector3d::Zero();
    columns(k, x.data());
    const double w2 = d.weight[index[k]] * d.weight[index[k]];
    rhs += (w2 * target(k)) * x;
    normal += (w2 * x) * x.transpose();
  }
  Eigen::Vector3d coef = Eigen::Vector3d::Zero();
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
  s.ssr = 0.0;
  for (std::size_t k = 0; k < index.size(); ++k) {
    Eigen::Vector3d x = Eigen::Vector3d::Zero();
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

// Data-driven start: a grid of characteristic fields from field_lo/2 to
// 2 field_hi by factors of 2 for each length, the linear parameters solved
// exactly at each grid point on a subsample, then a parabolic refinement of
// the best point along each length. Returns the full parameter vector.
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

// theta expressed in a layout for new data or a new alpha decision: lengths
// carried over, linear parameters solved afresh (on the grid's subsample;
// LM refines them).
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

double characteristic_field(const Shape& shape, const Values& v) {
  double field = shape.field_of_length(v.lphi_m);
  if (shape.has_lso()) field = std::max(field, shape.field_of_length(v.lso_m));
  return field;
}

struct Bounds {
  double ln_lower, ln_upper;  // bounds on ln L for every length
};

Bounds length_bounds(const Shape& shape, double field_step, double window) {
  return {std::log(shape.length_of_field(kBoundFactor * window)),
          std::log(shape.length_of_field(field_step / kBoundFactor))};
}

// One LM pass (Ceres' TinySolver: Levenberg-Marquardt on the normal
// equations with Jacobi scaling, no per-solve set-up). Lengths are clamped
// into the bounds before the solve and checked against them afterwards
// rather than constrained during it. On return residuals and jacobian
// (column-major, n x p) are those at theta.
PassResult levenberg_marquardt(const Shape& shape, const Layout& l, const Data& d,
                               const Bounds& bounds, int max_iterations, std::vector<double>& theta,
                               std::vector<double>& residuals, std::vector<double>& jacobian) {
  for (int k : {l.ln_lphi, l.ln_lso})
    if (k >= 0)
      theta[static_cast<std::size_t>(k)] =
          std::clamp(theta[static_cast<std::size_t>(k)], bounds.ln_lower, bounds.ln_upper);
  Evaluations evaluations(shape, l, d);
  const bool e = d.errors_known;
  switch (l.size) {
    case 1: return tiny_solve<1>(evaluations, e, max_iterations, theta, residuals, jacobian);
    case 2: return tiny_solve<2>(evaluations, e, max_iterations, theta, residuals, jacobian);
    case 3: return tiny_solve<3>(evaluations, e, max_iterations, theta, residuals, jacobian);
    case 4: return tiny_solve<4>(evaluations, e, max_iterations, theta, residuals, jacobian);
    default: break;  // make_layout never gives more than 4 parameters
  }
  PassResult r;
  r.termination = "unsupported number of parameters: " + std::to_string(l.size);
  return r;
}

std::vector<std::size_t> window_points(const std::vector<double>& field_t, double window) {
  std::vector<std::size_t> index;
  const double edge = window * (1.0 + 1e-12);
  for (std::size_t i = 0; i < field_t.size(); ++i)
    if (field_t[i] <= edge) index.push_back(i);
  return index;
}

Data select(const Data& all, const std::vector<std::size_t>& index) {
  Data d;
  d.errors_known = all.errors_known;
  d.resize(index.size());
  for (std::size_t k = 0; k < index.size(); ++k) d.set(k, all, index[k]);
  return d;
}

bool positive_finite(double x) { return std::isfinite(x) && x > 0.0; }

std::string check_options(const SweepFitOptions& o) {
  const SampleGeometry& g = o.geometry;
  for (auto [value, name] :
       {std::pair{g.squares, "geometry.squares"}, std::pair{g.width_m, "geometry.width_m"},
        std::pair{g.thickness_m, "geometry.thickness_m"},
        std::pair{g.mean_free_path_m, "geometry.mean_free_path_m"}})
    if (!std::isfinite(value) || value < 0.0)
      return std::string(name) + " must be finite and >= 0 (0 means unknown)";
  if (o.model == mc::Model::wire1d && !(g.width_m > 0.0))
    return "the wire1d model needs the wire width (geometry.width_m > 0)";
  if (o.model == mc::Model::kawabata3d && !(g.thickness_m > 0.0))
    return "the kawabata3d model needs the film thickness (geometry.thickness_m > 0)";
  if (o.alpha_fixed && !std::isfinite(*o.alpha_fixed)) return "alpha_fixed must be finite";
  if (!std::isfinite(o.alpha_default)) return "alpha_default must be finite";
  if (o.window_t && !positive_finite(*o.window_t)) return "window_t must be finite and > 0";
  if (!positive_finite(o.window_factor)) return "window_factor must be finite and > 0";
  if (!positive_finite(o.transport_cap)) return "transport_cap must be finite and > 0";
  if (!std::isfinite(o.alpha_free_min_ratio) || o.alpha_free_min_ratio < 0.0)
    return "alpha_free_min_ratio must be finite and >= 0";
  if (o.max_iterations <= 0) return "max_iterations must be > 0";
  return {};
}

void add_flag(SweepFitResult& r, Flag f) {
  if (!r.has(f)) r.flags.push_back(f);
}

}  // namespace

std::string_view flag_name(Flag f) {
  switch (f) {
    case Flag::window_too_narrow:
      return "window-too-narrow";
    case Flag::alpha_held:
      return "alpha-held";
    case Flag::alpha_lphi_degenerate:
      return "alpha-lphi-degenerate";
    case Flag::not_converged:
      return "not-converged";
    case Flag::outside_diffusive:
      return "outside-diffusive";
    case Flag::dimensionality_mismatch:
      return "dimensionality-mismatch";
    case Flag::too_few_points:
      return "too-few-points";
    case Flag::parameter_at_limit:
      return "parameter-at-limit";
  }
  return "unknown";
}

bool SweepFitResult::has(Flag f) const {
  return std::find(flags.begin(), flags.end(), f) != flags.end();
}

SweepFitResult fit_sweep(std::span<const conductance::DeltaSigmaPoint> points,
                         const SweepFitOptions& options, std::span<const double> sigma_err_s) {
  SweepFitResult result;
  result.model = options.model;
  auto fail = [&result](std::string message) {
    result.ok = false;
    result.error = std::move(message);
    return result;
  };

  if (std::string problem = check_options(options); !problem.empty()) return fail(problem);
  if (points.empty()) return fail("the sweep has no points");
  if (!sigma_err_s.empty() && sigma_err_s.size() != points.size())
    return fail("sigma_err_s has " + std::to_string(sigma_err_s.size()) + " entries for " +
                std::to_string(points.size()) + " points");

  Data all;
  all.resize(points.size());
  all.errors_known = !sigma_err_s.empty();
  const bool hln_terms = options.model == mc::Model::hln2d;
  double max_field = 0.0;
  std::size_t n_nonzero = 0;
  for (std::size_t i = 0; i < points.size(); ++i) {
    const double b = std::abs(points[i].field_t);
    if (!std::isfinite(b)) return fail("point " + std::to_string(i) + " has a non-finite field");
    if (!std::isfinite(points[i].delta_sigma_s))
      return fail("point " + std::to_string(i) + " has a non-finite conductance");
    double weight = 1.0;
    if (!sigma_err_s.empty()) {
      if (!positive_finite(sigma_err_s[i]))
        return fail("point " + std::to_string(i) + " has an error that is not finite and > 0");
      weight = kWl / sigma_err_s[i];
    }
    all.field_t[i] = b;
    all.y[i] = points[i].delta_sigma_s / kWl;
    all.weight[i] = weight;
    all.inverse_field[i] = hln_terms ? 1.0 / b : 0.0;  // +infinity at B = 0
    all.ln_inverse_field[i] = hln_terms ? (b > 0.0 ? -std::log(b) : kInf) : 0.0;
    max_field = std::max(max_field, b);
    if (b > 0.0) ++n_nonzero;
  }
  if (n_nonzero == 0) return fail("every point is at zero field; nothing to fit");

  Shape shape;
  shape.model = options.model;
  shape.wire_spin_orbit = options.wire_spin_orbit;
  shape.width_m = options.geometry.width_m;
  shape.thickness_m = options.geometry.thickness_m;

  // The mean field step: the finest field scale the sweep resolves.
  const double field_step = max_field / static_cast<double>(n_nonzero);
  double cap = max_field;
  const double mfp = options.geometry.mean_free_path_m;
  const double transport_field = mfp > 0.0 ? kHbar / (2.0 * kE * mfp * mfp) : kInf;
  if (mfp > 0.0) cap = std::min(cap, options.transport_cap * transport_field);
  if (options.model == mc::Model::wire1d)
    cap = std::min(cap, kHbar / (kE * shape.width_m * shape.width_m));

  // The window always holds the kMinWindowPoints lowest fields when the data
  // have them, so that a tiny B_c cannot empty it.
  std::vector<double> lowest = all.field_t;
  const auto kth =
      lowest.begin() + static_cast<long>(std::min(lowest.size(), kMinWindowPoints) - 1);
  std::nth_element(lowest.begin(), kth, lowest.end());
  const double min_window = *kth;
  auto auto_window = [&](double field) { return std::max(std::min(field, cap), min_window); };

  const bool alpha_can_be_free = options.model == mc::Model::hln2d && !options.alpha_fixed;
  const double alpha_hold = options.alpha_fixed.value_or(options.alpha_default);
  auto layout_for = [&](bool alpha_free) {
    return make_layout(shape, alpha_free, alpha_hold, options.fit_offset, options.fit_background);
  };
  auto alpha_free_at = [&](double window, const Values& v) {
    return alpha_can_be_free &&
           window >= options.alpha_free_min_ratio * mc::characteristic_field_t(v.lphi_m);
  };

  double window = options.window_t ? *options.window_t : auto_window(cap);
  std::vector<std::size_t> index = window_points(all.field_t, window);
  Data data = select(all, index);
  if (data.size() < static_cast<std::size_t>(layout_for(alpha_can_be_free).size) + 1) {
    add_flag(result, Flag::too_few_points);
    return fail("only " + std::to_string(data.size()) + " points inside the field window of " +
                std::to_string(window) + " T; too few to fit");
  }

  // Start values from the grid over the whole (capped) range, alpha free if
  // it may be; if the window then turns out too short for a free alpha, start
  // again with it held.
  Layout layout = layout_for(alpha_can_be_free);
  std::vector<double> theta = grid_start(shape, layout, data, field_step, window);
  if (alpha_can_be_free && !alpha_free_at(window, unpack(layout, theta.data()))) {
    layout = layout_for(false);
    theta = grid_start(shape, layout, data, field_step, window);
  }

  // Moves the window to `next` (new points, alpha decided afresh, linear
  // parameters re-solved when anything changed). Returns false when it would
  // leave too few points to fit.
  auto move_window = [&](double next) {
    std::vector<std::size_t> next_index = window_points(all.field_t, next);
    if (next_index.size() < static_cast<std::size_t>(layout_for(false).size) + 1) return false;
    const bool new_points = next_index.size() != index.size();
    window = next;
    if (new_points) {
      index = std::move(next_index);
      data = select(all, index);
    }
    const Layout wanted = layout_for(alpha_free_at(window, unpack(layout, theta.data())));
    if (new_points || !(wanted == layout)) {
      theta = relayout(shape, layout, wanted, data, theta);
      layout = wanted;
    }
    return true;
  };
  // The window settles when it moves by less than kWindowSettle (relative)
  // and the alpha decision stays the same.
  auto settled = [&](double next) {
    const bool alpha_same =
        alpha_free_at(next, unpack(layout, theta.data())) == (layout.alpha >= 0) ||
        !alpha_can_be_free;
    return std::abs(next - window) <= kWindowSettle * window && alpha_same;
  };
  auto next_window = [&] {
    return auto_window(options.window_factor *
                       characteristic_field(shape, unpack(layout, theta.data())));
  };
  if (!options.window_t && !settled(next_window())) move_window(next_window());

  PassResult pass;
  int total_iterations = 0;
  std::vector<double> residuals, jacobian_columns;
  for (int round = 0; round < kMaxWindowPasses; ++round) {
    pass = levenberg_marquardt(shape, layout, data, length_bounds(shape, field_step, window),
                               options.max_iterations, theta, residuals, jacobian_columns);
    total_iterations += pass.iterations;
    if (options.window_t) break;
    const double next = next_window();
    if (settled(next) || round + 1 == kMaxWindowPasses || !move_window(next)) break;
  }

  // Covariance from the analytic Jacobian at the solution.
  const std::size_t n = data.size();
  const std::size_t p = static_cast<std::size_t>(layout.size);
  const Eigen::Map<const Eigen::MatrixXd> jacobian(jacobian_columns.data(), static_cast<long>(n),
                                                   static_cast<long>(p));
  double chi2 = 0.0;
  for (double r : residuals) chi2 += r * r;
  const double dof = static_cast<double>(n) - static_cast<double>(p);
  const double chi2_red = dof > 0 ? chi2 / dof : kInf;
  // J^T J column by column: p^2 dot products of length n, no general matrix
  // product (whose blocking and temporaries cost more than the sums here).
  Eigen::MatrixXd jtj(static_cast<long>(p), static_cast<long>(p));
  for (long a = 0; a < static_cast<long>(p); ++a)
    for (long b = 0; b <= a; ++b) jtj(a, b) = jtj(b, a) = jacobian.col(a).dot(jacobian.col(b));
  const Eigen::VectorXd scale = jtj.diagonal().cwiseSqrt().cwiseInverse();
  Eigen::MatrixXd covariance =
      Eigen::MatrixXd::Constant(static_cast<long>(p), static_cast<long>(p), kInf);
  bool singular = true;
  if (scale.allFinite()) {
    const Eigen::MatrixXd normalized = scale.asDiagonal() * jtj * scale.asDiagonal();
    Eigen::LLT<Eigen::MatrixXd> llt(normalized);
    const Eigen::VectorXd eigen = normalized.selfadjointView<Eigen::Lower>().eigenvalues();
    if (llt.info() == Eigen::Success && eigen.minCoeff() > 1e-13 * eigen.maxCoeff()) {
      singular = false;
      covariance =
          scale.asDiagonal() *
          llt.solve(Eigen::MatrixXd::Identity(static_cast<long>(p), static_cast<long>(p))) *
          scale.asDiagonal();
      if (sigma_err_s.empty()) covariance *= chi2_red;
    }
  }
  auto sd = [&](int k) { return std::sqrt(covariance(k, k)); };
  auto corr = [&](int a, int b) {
    return singular ? std::numeric_limits<double>::quiet_NaN()
                    : covariance(a, b) / std::sqrt(covariance(a, a) * covariance(b, b));
  };

  const Values v = unpack(layout, theta.data());
  result.ok = true;
  result.lphi_m = v.lphi_m;
  result.lphi_err_m = v.lphi_m * sd(layout.ln_lphi);
  if (options.model == mc::Model::hln2d) {
    result.alpha = v.alpha;
    result.alpha_err = layout.alpha >= 0 ? sd(layout.alpha) : 0.0;
    if (layout.alpha >= 0) result.corr_alpha_lphi = corr(layout.alpha, layout.ln_lphi);
  }
  if (layout.ln_lso >= 0) {
    result.lso_m = v.lso_m;
    result.lso_err_m = v.lso_m * sd(layout.ln_lso);
    result.corr_lso_lphi = corr(layout.ln_lso, layout.ln_lphi);
  }
  if (layout.offset >= 0) {
    result.offset_s = v.offset * kWl;
    result.offset_err_s = sd(layout.offset) * kWl;
  }
  if (layout.background >= 0) {
    result.background_s_per_t2 = v.background * kWl;
    result.background_err_s_per_t2 = sd(layout.background) * kWl;
  }
  result.chi2 = chi2;
  result.chi2_red = chi2_red;
  result.n_points = n;
  result.field_window_t = std::min(window, max_field);
  result.b_phi_t = mc::characteristic_field_t(v.lphi_m);
  result.iterations = total_iterations;
  result.converged = pass.converged;
  result.termination = pass.termination;

  // Quality flags (thresholds in the header).
  const double b_c = characteristic_field(shape, v);
  if (result.field_window_t < kNarrowWindowRatio * b_c) add_flag(result, Flag::window_too_narrow);
  if (alpha_can_be_free && layout.alpha < 0) add_flag(result, Flag::alpha_held);
  if (singular || (layout.alpha >= 0 && std::abs(result.corr_alpha_lphi) > kDegenerateCorrelation))
    add_flag(result, Flag::alpha_lphi_degenerate);
  if (!pass.converged) add_flag(result, Flag::not_converged);
  if (mfp > 0.0 && (result.field_window_t > transport_field || v.lphi_m < mfp))
    add_flag(result, Flag::outside_diffusive);
  const double t = options.geometry.thickness_m, w = options.geometry.width_m;
  switch (options.model) {
    case mc::Model::hln2d:
    case mc::Model::hln2d_so:
      if (t > 0.0 && v.lphi_m < t) add_flag(result, Flag::dimensionality_mismatch);
      break;
    case mc::Model::wire1d:
      if (v.lphi_m < w || (t > 0.0 && v.lphi_m < t))
        add_flag(result, Flag::dimensionality_mismatch);
      break;
    case mc::Model::kawabata3d:
      if (v.lphi_m > kThreeDimensionalSlack * t) add_flag(result, Flag::dimensionality_mismatch);
      break;
  }
  if (n < std::max<std::size_t>(kMinWindowPoints, 3 * p)) add_flag(result, Flag::too_few_points);
  const Bounds bounds = length_bounds(shape, field_step, window);
  for (int k : {layout.ln_lphi, layout.ln_lso}) {
    if (k < 0) continue;
    const double ln_length = theta[static_cast<std::size_t>(k)];
    const bool at_bound = ln_length <= bounds.ln_lower || ln_length >= bounds.ln_upper;
    const bool unresolved =
        shape.field_of_length(std::exp(ln_length)) < kResolvedStepFraction * field_step;
    if (at_bound || unresolved) add_flag(result, Flag::parameter_at_limit);
  }
  return result;
}

}  // namespace lphi::fit
