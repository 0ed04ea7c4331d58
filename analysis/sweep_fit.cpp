#include "analysis/sweep_fit.hpp"

#include <ceres/tiny_solver.h>

#include <Eigen/Dense>
#include <algorithm>
#include <array>
#include <cmath>
#include <cstdio>
#include <limits>
#include <memory>
#include <span>
#include <string>
#include <vector>

#include "analysis/constants.hpp"
#include "analysis/special_functions.hpp"

namespace lphi::fit {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kWl = si::wl_conductance_s;  // e^2/(pi h), the residual unit
constexpr double kHbar = si::hbar_j_s;
constexpr double kE = si::elementary_charge_c;

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

// The field-dependent part of the fit function: which model, and the fixed
// geometry it needs.
struct Shape {
  mc::Model model = mc::Model::hln2d;
  bool wire_spin_orbit = false;
  double width_m = 0.0;
  double thickness_m = 0.0;

  bool has_lso() const {
    return model == mc::Model::hln2d_so || (model == mc::Model::wire1d && wire_spin_orbit);
  }

  double value(double field_t, double lphi_m, double lso_m, double alpha) const {
    switch (model) {
      case mc::Model::hln2d:
        return mc::hln2d(field_t, alpha, lphi_m);
      case mc::Model::hln2d_so:
        return mc::hln2d_so(field_t, lphi_m, lso_m);
      case mc::Model::wire1d:
        return wire_spin_orbit ? mc::wire1d_so(field_t, lphi_m, lso_m, width_m)
                               : mc::wire1d(field_t, lphi_m, width_m);
      case mc::Model::kawabata3d:
        return mc::kawabata3d(field_t, lphi_m, thickness_m);
    }
    return 0.0;
  }

  mc::ModelGradient gradient(double field_t, double lphi_m, double lso_m, double alpha) const {
    switch (model) {
      case mc::Model::hln2d:
        return mc::hln2d_grad(field_t, alpha, lphi_m);
      case mc::Model::hln2d_so:
        return mc::hln2d_so_grad(field_t, lphi_m, lso_m);
      case mc::Model::wire1d:
        return wire_spin_orbit ? mc::wire1d_so_grad(field_t, lphi_m, lso_m, width_m)
                               : mc::wire1d_grad(field_t, lphi_m, width_m);
      case mc::Model::kawabata3d:
        return mc::kawabata3d_grad(field_t, lphi_m, thickness_m);
    }
    return {};
  }

  // The field at which a length leaves the low-field regime (see the header)
  // and its inverse.
  double field_of_length(double length_m) const {
    if (model == mc::Model::wire1d) return std::sqrt(3.0) * kHbar / (kE * width_m * length_m);
    return mc::characteristic_field_t(length_m);
  }
  double length_of_field(double field_t) const {
    if (model == mc::Model::wire1d) return std::sqrt(3.0) * kHbar / (kE * width_m * field_t);
    return mc::characteristic_length_m(field_t);
  }
};

// Positions of the parameters in the single parameter block; -1 when absent.
struct Layout {
  int ln_lphi = 0;
  int ln_lso = -1;
  int alpha = -1;
  int offset = -1;
  int background = -1;
  int size = 1;
  double alpha_held = 1.0;  // used when alpha is not a parameter (hln2d)

  bool operator==(const Layout&) const = default;
};

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

// The points of one pass. y is Delta sigma in units of e^2/(pi h); weight is
// 1/error in the same unit, or 1 when the errors are unknown. The HLN model
// needs x = B_phi/|B| and ln x at every point of every model pass; 1/|B| and
// -ln|B| are taken once per sweep (both +infinity at B = 0, where x is
// infinite and the bracket 0; both 0 for the other models, which do not use
// them).
struct Data {
  std::vector<double> field_t;
  std::vector<double> y;
  std::vector<double> weight;
  std::vector<double> inverse_field;
  std::vector<double> ln_inverse_field;
  bool errors_known = false;  // weights from given point errors
  std::size_t size() const { return field_t.size(); }
  void resize(std::size_t n) {
    for (std::vector<double>* v : {&field_t, &y, &weight, &inverse_field, &ln_inverse_field})
      v->resize(n);
  }
  void set(std::size_t i, const Data& from, std::size_t j) {
    field_t[i] = from.field_t[j];
    y[i] = from.y[j];
    weight[i] = from.weight[j];
    inverse_field[i] = from.inverse_field[j];
    ln_inverse_field[i] = from.ln_inverse_field[j];
  }
};

// hbar/(4e), so that ln B_phi = ln(hbar/(4e)) - 2 ln L_phi.
const double kLnHbarOver4e = std::log(kHbar / (4.0 * kE));

// Every parameter in natural form, whether fitted or not.
struct Values {
  double lphi_m = 0, lso_m = 0, alpha = 1, offset = 0, background = 0;
};

Values unpack(const Layout& l, const double* theta) {
  Values v;
  v.lphi_m = std::exp(theta[l.ln_lphi]);
  if (l.ln_lso >= 0) v.lso_m = std::exp(theta[l.ln_lso]);
  v.alpha = l.alpha >= 0 ? theta[l.alpha] : l.alpha_held;
  if (l.offset >= 0) v.offset = theta[l.offset];
  if (l.background >= 0) v.background = theta[l.background];
  return v;
}

// Weighted residuals w_i (f(B_i) - y_i) and their derivatives (column-major,
// n x layout.size, column k at jacobian + k n), all from the analytic
// gradients. Value and Jacobian come out of one pass because the model's
// gradient functions return both for little more than the value alone.
void evaluate(const Shape& shape, const Layout& l, const Data& d, const double* theta,
              double* residuals, double* jacobian, std::span<special::BracketAndSlope> scratch);

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

// Two evaluations of one LM pass: the current iterate (the last point whose
// Jacobian the solver asked for) and the latest trial point. The solver asks
// for a trial point's residuals, then, once it accepts the step, for its
// Jacobian too; each model pass computes both, so every point costs one pass,
// and the covariance at the solution reuses the pass at the solution. The
// buffers are sized once per pass (and not cleared: every entry is written
// before it is read); nothing is allocated inside the LM loop.
class Evaluations {
 public:
  Evaluations(const Shape& shape, const Layout& layout, const Data& data)
      : shape_(shape), layout_(layout), data_(data),
        p_(static_cast<std::size_t>(layout.size)), n_(data.size()) {
    for (Slot& s : slots_) {
      s.theta = std::make_unique_for_overwrite<double[]>(p_);
      s.residuals = std::make_unique_for_overwrite<double[]>(n_);
      s.jacobian = std::make_unique_for_overwrite<double[]>(n_ * p_);
    }
    if (shape.model == mc::Model::hln2d)
      scratch_ = std::make_unique_for_overwrite<special::BracketAndSlope[]>(n_);
  }
  struct Slot {
    std::unique_ptr<double[]> theta;      // p
    std::unique_ptr<double[]> residuals;  // n
    std::unique_ptr<double[]> jacobian;   // n x p, column-major
    bool valid = false;
  };
  std::size_t size() const { return n_; }
  // The evaluation at theta; made now unless one of the two slots holds it.
  // A request for the Jacobian marks theta as the iterate, which the next
  // new point must not overwrite.
  const Slot& at(const double* theta, bool iterate) {
    std::size_t k = 0;
    while (k < slots_.size() && !holds(slots_[k], theta)) ++k;
    if (k == slots_.size()) {
      k = 1 - iterate_;
      Slot& s = slots_[k];
      evaluate(shape_, layout_, data_, theta, s.residuals.get(), s.jacobian.get(),
               {scratch_.get(), scratch_ ? n_ : 0});
      std::copy(theta, theta + p_, s.theta.get());
      s.valid = true;
    }
    if (iterate) iterate_ = k;
    return slots_[k];
  }

 private:
  bool holds(const Slot& s, const double* theta) const {
    return s.valid && std::equal(s.theta.get(), s.theta.get() + p_, theta);
  }
  const Shape& shape_;
  const Layout& layout_;
  const Data& data_;
  std::size_t p_, n_;
  std::array<Slot, 2> slots_;
  std::unique_ptr<special::BracketAndSlope[]> scratch_;  // hln2d only
  std::size_t iterate_ = 0;
};

double sum_of_squares(const double* r, std::size_t n) {
  double sum = 0.0;
  for (std::size_t i = 0; i < n; ++i) sum += r[i] * r[i];
  return sum;
}

// The Gauss-Newton step left at an iterate, in standard errors: with J^T J
// and g = J^T r at the iterate, the step is delta = (J^T J)^-1 g and the
// chi-square it would remove is g^T delta (for a linear model exactly,
// near the minimum to second order). The covariance is (J^T J)^-1, times
// chi2/(n - p) when the point errors are unknown (see the header), so the
// step's length in standard errors is sqrt(g^T delta) or
// sqrt(g^T delta (n - p)/chi2). Returns +infinity when J^T J is singular.
template <int P>
double gauss_newton_step_in_standard_errors(const double* residuals, const double* jacobian,
                                            std::size_t n, bool errors_known) {
  Eigen::Matrix<double, P, P> jtj = Eigen::Matrix<double, P, P>::Zero();
  Eigen::Matrix<double, P, 1> g = Eigen::Matrix<double, P, 1>::Zero();
  double chi2 = 0.0;
  std::array<const double*, P> column;
  for (std::size_t a = 0; a < P; ++a) column[a] = jacobian + a * n;
  std::array<double, P> g_sum{};
  std::array<double, P * (P + 1) / 2> jtj_sum{};  // lower triangle, row by row
  for (std::size_t i = 0; i < n; ++i) {
    const double r = residuals[i];
    chi2 += r * r;
    std::size_t t = 0;
    for (std::size_t a = 0; a < P; ++a) {
      const double ja = column[a][i];
      g_sum[a] += ja * r;
      for (std::size_t b = 0; b <= a; ++b) jtj_sum[t++] += ja * column[b][i];
    }
  }
  std::size_t t = 0;
  for (int a = 0; a < P; ++a) {
    g[a] = g_sum[static_cast<std::size_t>(a)];
    for (int b = 0; b <= a; ++b) jtj(a, b) = jtj(b, a) = jtj_sum[t++];
  }
  const double dof = static_cast<double>(n) - P;
  if (!(dof > 0.0)) return kInf;
  // Jacobi scaling keeps the factorization well conditioned; the quadratic
  // form is invariant under it.
  const Eigen::Matrix<double, P, 1> scale = jtj.diagonal().cwiseSqrt().cwiseInverse();
  if (!scale.allFinite()) return kInf;
  const Eigen::Matrix<double, P, P> normalized = scale.asDiagonal() * jtj * scale.asDiagonal();
  const Eigen::LLT<Eigen::Matrix<double, P, P>> llt(normalized);
  if (llt.info() != Eigen::Success) return kInf;
  const Eigen::Matrix<double, P, 1> scaled_g = scale.cwiseProduct(g);
  const double removed = scaled_g.dot(llt.solve(scaled_g));
  const double variance_scale = errors_known ? 1.0 : chi2 / dof;
  const double steps2 = removed / variance_scale;
  return std::isfinite(steps2) && steps2 >= 0.0 ? std::sqrt(steps2) : kInf;
}

// LM stops at an iterate whose Gauss-Newton step left is below this many
// standard errors: the answer is then that close to the minimum, and the
// trial step that would confirm it (one more model pass) is not taken. The
// GSL cross-check asks for agreement to 0.01 standard errors.
constexpr double kGaussNewtonStepTolerance = 1e-3;

// The sweep as a ceres::TinySolver function with P parameters (fixed at
// compile time, so the normal equations are small fixed-size products) and
// one residual per point.
//
// TinySolver evaluates the Jacobian at each new iterate and then compares
// the gradient with options.gradient_tolerance. The function sees that
// Jacobian first: when the Gauss-Newton step left there is below
// kGaussNewtonStepTolerance, it raises the solver's gradient tolerance to
// infinity so that the solver stops at that iterate (GRADIENT_TOO_SMALL),
// and records that it did so.
template <int P>
class SweepResiduals {
 public:
  using Scalar = double;
  enum { NUM_RESIDUALS = Eigen::Dynamic, NUM_PARAMETERS = P };

  SweepResiduals(Evaluations& evaluations, bool errors_known, double* solver_gradient_tolerance)
      : evaluations_(evaluations), errors_known_(errors_known),
        solver_gradient_tolerance_(solver_gradient_tolerance) {}
  int NumResiduals() const { return static_cast<int>(evaluations_.size()); }
  bool operator()(const double* theta, double* residuals, double* jacobian) const {
    const std::size_t n = evaluations_.size();
    const Evaluations::Slot& e = evaluations_.at(theta, jacobian != nullptr);
    std::copy(e.residuals.get(), e.residuals.get() + n, residuals);
    if (jacobian != nullptr) {
      std::copy(e.jacobian.get(), e.jacobian.get() + n * P, jacobian);
      if (gauss_newton_step_in_standard_errors<P>(e.residuals.get(), e.jacobian.get(), n,
                                                  errors_known_) < kGaussNewtonStepTolerance) {
        *solver_gradient_tolerance_ = kInf;
        stopped_ = true;
      }
    }
    return true;
  }
  bool stopped_at_gauss_newton_tolerance() const { return stopped_; }

 private:
  Evaluations& evaluations_;
  bool errors_known_;
  double* solver_gradient_tolerance_;
  mutable bool stopped_ = false;
};

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

struct PassResult {
  int iterations = 0;
  bool converged = false;
  std::string termination;
};

// Convergence, besides the Gauss-Newton step test above (which normally
// ends the solve first), as in Ceres' defaults for a small problem: the
// chi-square changes by less than kFunctionTolerance of itself, or the step is below
// kParameterTolerance relative, or the (Jacobi-scaled) gradient's largest
// entry is below kGradientTolerance. Residuals are of order one (see the
// header), so the cost is ~n/2 in units of the noise; a chi-square change
// ~1e-7 n means the step before the last was ~0.01 standard errors for
// n <= 1e4, and Gauss-Newton steps near the minimum shrink quadratically, so
// the solution sits far closer than that to the minimum.
constexpr double kFunctionTolerance = 1e-7;
constexpr double kParameterTolerance = 1e-8;
constexpr double kGradientTolerance = 1e-10;
// TinySolver's function tolerance is absolute (in chi-square); it is set
// from the chi-square at the start of a solve, and the solve is resumed with
// a tighter one while the chi-square fell by more than this factor.
constexpr double kToleranceRefresh = 0.5;

template <int P>
PassResult tiny_solve(Evaluations& evaluations, bool errors_known, int max_iterations,
                      std::vector<double>& theta, std::vector<double>& residuals,
                      std::vector<double>& jacobian) {
  using Solver = ceres::TinySolver<SweepResiduals<P>>;
  Solver solver;
  const SweepResiduals<P> function(evaluations, errors_known, &solver.options.gradient_tolerance);
  solver.options.parameter_tolerance = kParameterTolerance;
  typename Solver::Parameters x = Eigen::Map<const Eigen::Matrix<double, P, 1>>(theta.data());

  PassResult r;
  const std::size_t n = evaluations.size();
  double chi2_scale = sum_of_squares(evaluations.at(x.data(), true).residuals.get(), n);
  int left = max_iterations;
  typename Solver::Status status = Solver::HIT_MAX_ITERATIONS;
  double chi2 = chi2_scale;
  while (left > 0) {
    solver.options.gradient_tolerance = kGradientTolerance;
    solver.options.function_tolerance = kFunctionTolerance * chi2_scale;
    // TinySolver tries at most max_num_iterations - 1 steps.
    solver.options.max_num_iterations = left + 1;
    const typename Solver::Summary& summary = solver.Solve(function, &x);
    status = summary.status;
    const int steps = std::min(summary.iterations, left);
    r.iterations += steps;
    left -= steps;
    chi2 = 2.0 * summary.final_cost;
    if (status != Solver::COST_CHANGE_TOO_SMALL || !(chi2 < kToleranceRefresh * chi2_scale) ||
        steps == 0)
      break;
    chi2_scale = chi2;
  }
  std::copy(x.data(), x.data() + P, theta.begin());
  const Evaluations::Slot& at_solution = evaluations.at(theta.data(), true);
  residuals.assign(at_solution.residuals.get(), at_solution.residuals.get() + n);
  jacobian.assign(at_solution.jacobian.get(), at_solution.jacobian.get() + n * P);
  chi2 = sum_of_squares(residuals.data(), n);

  r.converged = std::isfinite(chi2);
  char message[160];
  switch (status) {
    case Solver::COST_CHANGE_TOO_SMALL:
      std::snprintf(message, sizeof message,
                    "function tolerance reached: |chi2 change| < %.0e of chi2 %.6g",
                    kFunctionTolerance, chi2);
      break;
    case Solver::RELATIVE_STEP_SIZE_TOO_SMALL:
      std::snprintf(message, sizeof message, "parameter tolerance reached: |step| < %.0e |x|",
                    kParameterTolerance);
      break;
    case Solver::GRADIENT_TOO_SMALL:
      if (function.stopped_at_gauss_newton_tolerance())
        std::snprintf(message, sizeof message,
                      "Gauss-Newton step left below %.0e standard errors", kGaussNewtonStepTolerance);
      else
        std::snprintf(message, sizeof message,
                      "gradient tolerance reached: max |scaled gradient| < %.0e",
                      kGradientTolerance);
      break;
    case Solver::COST_TOO_SMALL:
      std::snprintf(message, sizeof message, "chi2 %.3g is zero to double precision", chi2);
      break;
    case Solver::HIT_MAX_ITERATIONS:
    default:
      r.converged = false;
      std::snprintf(message, sizeof message, "maximum number of iterations (%d) reached",
                    max_iterations);
      break;
  }
  if (!std::isfinite(chi2)) std::snprintf(message, sizeof message, "chi2 is not finite");
  r.termination = message;
  return r;
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
