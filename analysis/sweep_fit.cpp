// The one-sweep fit (analysis/sweep_fit.hpp): one algorithm, the adaptive
// field window around Levenberg-Marquardt, read top-down in fit_sweep():
// check the input, put the sweep in fit form, fix the field scales, choose
// the first window and start values, solve and move the window until it
// settles, then the covariance, the reported parameters and the quality
// flags. The fit function is in analysis/internal/sweep_fit_function.*, the
// start values in analysis/internal/sweep_fit_start.*, the solves in
// analysis/internal/sweep_fit_lm.hpp.
#include "analysis/sweep_fit.hpp"

#include <Eigen/Dense>
#include <algorithm>
#include <array>
#include <boost/math/distributions/fisher_f.hpp>
#include <cmath>
#include <limits>
#include <span>
#include <string>
#include <vector>

#include <fmt/format.h>

#include "analysis/constants.hpp"
#include "analysis/internal/sweep_fit_function.hpp"
#include "analysis/internal/sweep_fit_start.hpp"

namespace lphi::fit {
namespace {

using detail::Data;
using detail::Evaluations;
using detail::grid_start;
using detail::kE;
using detail::kHbar;
using detail::kInf;
using detail::Layout;
using detail::PassResult;
using detail::relayout;
using detail::Shape;
using detail::tiny_solve;
using detail::unpack;
using detail::Values;

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
constexpr double kNoSignalP = 1e-3;
constexpr double kShrinkSigmas = 2.0;
constexpr double kAlphaUnresolved = 0.5;
constexpr double kHeldRejectSigmas = 3.0;

Layout make_layout(const Shape& shape, bool alpha_free, double alpha_held, bool offset,
                   bool background, bool odd) {
  Layout l;
  int next = 1;
  if (shape.has_lso()) l.ln_lso = next++;
  if (shape.model == mc::Model::hln2d && alpha_free) l.alpha = next++;
  if (offset) l.offset = next++;
  if (background) l.background = next++;
  if (odd) l.odd = next++;
  l.size = next;
  l.alpha_held = alpha_held;
  return l;
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
    case 5: return tiny_solve<5>(evaluations, e, max_iterations, theta, residuals, jacobian);
    default: break;  // make_layout never gives more than 5 parameters
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

bool alpha_may_be_free(const SweepFitOptions& o) {
  return o.model == mc::Model::hln2d && !o.alpha_fixed;
}

// What is wrong with the points, if anything: their number, then point by
// point the field, the conductance and the error, then whether any point
// lies off zero field.
std::string check_points(std::span<const conductance::DeltaSigmaPoint> points,
                         std::span<const double> sigma_err_s) {
  if (points.empty()) return "the sweep has no points";
  if (!sigma_err_s.empty() && sigma_err_s.size() != points.size())
    return "sigma_err_s has " + std::to_string(sigma_err_s.size()) + " entries for " +
           std::to_string(points.size()) + " points";
  std::size_t n_nonzero = 0;
  for (std::size_t i = 0; i < points.size(); ++i) {
    const double b = std::abs(points[i].field_t);
    if (!std::isfinite(b)) return "point " + std::to_string(i) + " has a non-finite field";
    if (!std::isfinite(points[i].delta_sigma_s))
      return "point " + std::to_string(i) + " has a non-finite conductance";
    if (!sigma_err_s.empty() && !positive_finite(sigma_err_s[i]))
      return "point " + std::to_string(i) + " has an error that is not finite and > 0";
    if (b > 0.0) ++n_nonzero;
  }
  if (n_nonzero == 0) return "every point is at zero field; nothing to fit";
  return {};
}

// The sweep in fit form (checked points): |B|, Delta sigma in units of
// e^2/(pi h), the weights, and for hln2d the per-sweep 1/|B| and -ln|B|.
Data fit_form(std::span<const conductance::DeltaSigmaPoint> points,
              std::span<const double> sigma_err_s, mc::Model model) {
  Data all;
  all.resize(points.size());
  all.errors_known = !sigma_err_s.empty();
  const bool hln_terms = model == mc::Model::hln2d;
  for (std::size_t i = 0; i < points.size(); ++i) {
    const double b = std::abs(points[i].field_t);
    all.field_t[i] = b;
    all.y[i] = points[i].delta_sigma_s / kWl;
    all.weight[i] = sigma_err_s.empty() ? 1.0 : kWl / sigma_err_s[i];
    all.inverse_field[i] = hln_terms ? 1.0 / b : 0.0;  // +infinity at B = 0
    all.ln_inverse_field[i] = hln_terms ? (b > 0.0 ? -std::log(b) : kInf) : 0.0;
  }
  return all;
}

Shape shape_of(const SweepFitOptions& options) {
  Shape shape;
  shape.model = options.model;
  shape.wire_spin_orbit = options.wire_spin_orbit;
  shape.width_m = options.geometry.width_m;
  shape.thickness_m = options.geometry.thickness_m;
  return shape;
}

// The fields the window rules compare with.
struct FieldScales {
  double max_field = 0.0;          // the largest |B|
  double field_step = 0.0;         // the mean field step: the finest scale resolved
  double transport_field = kInf;   // B_tr = hbar/(2 e l^2); +infinity when l is unknown
  double cap = 0.0;                // the widest automatic window
  double min_window = 0.0;         // holds the kMinWindowPoints lowest fields
  // The automatic window for a characteristic field: capped, and never so
  // small that a tiny B_c empties it.
  double window_for(double field) const { return std::max(std::min(field, cap), min_window); }
};

FieldScales field_scales(const Data& all, const SweepFitOptions& options, const Shape& shape) {
  FieldScales s;
  std::size_t n_nonzero = 0;
  for (double b : all.field_t) {
    s.max_field = std::max(s.max_field, b);
    if (b > 0.0) ++n_nonzero;
  }
  s.field_step = s.max_field / static_cast<double>(n_nonzero);
  s.cap = s.max_field;
  const double mfp = options.geometry.mean_free_path_m;
  if (mfp > 0.0) s.transport_field = kHbar / (2.0 * kE * mfp * mfp);
  if (mfp > 0.0) s.cap = std::min(s.cap, options.transport_cap * s.transport_field);
  if (options.model == mc::Model::wire1d)
    s.cap = std::min(s.cap, kHbar / (kE * shape.width_m * shape.width_m));
  std::vector<double> lowest = all.field_t;
  const auto kth =
      lowest.begin() + static_cast<long>(std::min(lowest.size(), kMinWindowPoints) - 1);
  std::nth_element(lowest.begin(), kth, lowest.end());
  s.min_window = *kth;
  return s;
}

// Where the window search ended: the window, its points, the layout (alpha
// free or held), the parameters, and the residuals and Jacobian at them.
struct Solution {
  double window = 0.0;
  std::vector<std::size_t> index;  // of the points inside the window
  Data data;
  Layout layout;
  std::vector<double> theta;
  std::vector<double> residuals, jacobian_columns;  // n and n x p, column-major
  PassResult pass;                                  // the last LM pass
  int iterations = 0;                               // all passes
  Values values() const { return unpack(layout, theta.data()); }
};

// Chi-square and the covariance from the analytic Jacobian at the solution,
// scaled by chi2_red when the point errors are unknown.
struct Covariance {
  double chi2 = 0.0, chi2_red = kInf;
  Eigen::MatrixXd matrix;  // +infinity everywhere when singular
  bool singular = true;
  double sd(int k) const { return std::sqrt(matrix(k, k)); }
  double corr(int a, int b) const {
    return singular ? std::numeric_limits<double>::quiet_NaN()
                    : matrix(a, b) / std::sqrt(matrix(a, a) * matrix(b, b));
  }
};

Covariance covariance_at(const Solution& s) {
  Covariance c;
  const std::size_t n = s.data.size();
  const std::size_t p = static_cast<std::size_t>(s.layout.size);
  const Eigen::Map<const Eigen::MatrixXd> jacobian(s.jacobian_columns.data(), static_cast<long>(n),
                                                   static_cast<long>(p));
  for (double r : s.residuals) c.chi2 += r * r;
  const double dof = static_cast<double>(n) - static_cast<double>(p);
  c.chi2_red = dof > 0 ? c.chi2 / dof : kInf;
  // J^T J column by column: p^2 dot products of length n, no general matrix
  // product (whose blocking and temporaries cost more than the sums here).
  Eigen::MatrixXd jtj(static_cast<long>(p), static_cast<long>(p));
  for (long a = 0; a < static_cast<long>(p); ++a)
    for (long b = 0; b <= a; ++b) jtj(a, b) = jtj(b, a) = jacobian.col(a).dot(jacobian.col(b));
  const Eigen::VectorXd scale = jtj.diagonal().cwiseSqrt().cwiseInverse();
  c.matrix = Eigen::MatrixXd::Constant(static_cast<long>(p), static_cast<long>(p), kInf);
  if (!scale.allFinite()) return c;
  const Eigen::MatrixXd normalized = scale.asDiagonal() * jtj * scale.asDiagonal();
  Eigen::LLT<Eigen::MatrixXd> llt(normalized);
  const Eigen::VectorXd eigen = normalized.selfadjointView<Eigen::Lower>().eigenvalues();
  if (llt.info() != Eigen::Success || !(eigen.minCoeff() > 1e-13 * eigen.maxCoeff())) return c;
  c.singular = false;
  c.matrix = scale.asDiagonal() *
             llt.solve(Eigen::MatrixXd::Identity(static_cast<long>(p), static_cast<long>(p))) *
             scale.asDiagonal();
  if (!s.data.errors_known) c.matrix *= c.chi2_red;
  return c;
}

// The adaptive window: LM passes, each followed by a move of the window to
// window_factor * B_c of the parameters found, until it settles (moves by
// less than kWindowSettle, relative, with the alpha decision unchanged) or
// after kMaxWindowPasses passes. A window given in the options stays put.
class WindowSearch {
 public:
  WindowSearch(const Data& all, const Shape& shape, const SweepFitOptions& options,
               const FieldScales& scales, bool hold_alpha = false)
      : all_(all), shape_(shape), options_(options), scales_(scales),
        alpha_can_be_free_(alpha_may_be_free(options) && !hold_alpha),
        alpha_hold_(options.alpha_fixed.value_or(options.alpha_default)) {
    s_.window = options.window_t ? *options.window_t : scales.window_for(scales.cap);
    s_.index = window_points(all.field_t, s_.window);
    s_.data = select(all, s_.index);
  }

  bool enough_points() const {
    return s_.data.size() >= static_cast<std::size_t>(layout_for(alpha_can_be_free_).size) + 1;
  }
  std::string too_few_points() const {
    return "only " + std::to_string(s_.data.size()) + " points inside the field window of " +
           std::to_string(s_.window) + " T; too few to fit";
  }

  // Start values from the grid over the whole (capped) range, alpha free if
  // it may be; if the window then turns out too short for a free alpha, start
  // again with it held. Then the first move of the window.
  void start() {
    s_.layout = layout_for(alpha_can_be_free_);
    s_.theta = grid_start(shape_, s_.layout, s_.data, scales_.field_step, s_.window);
    if (alpha_can_be_free_ && !alpha_free_at(s_.window, s_.values())) {
      s_.layout = layout_for(false);
      s_.theta = grid_start(shape_, s_.layout, s_.data, scales_.field_step, s_.window);
    }
    if (!options_.window_t && !settled(next_window())) move_to(next_window());
  }

  Solution solve() && {
    for (int round = 0; round < kMaxWindowPasses; ++round) {
      s_.pass = levenberg_marquardt(shape_, s_.layout, s_.data,
                                    length_bounds(shape_, scales_.field_step, s_.window),
                                    options_.max_iterations, s_.theta, s_.residuals,
                                    s_.jacobian_columns);
      s_.iterations += s_.pass.iterations;
      if (options_.window_t) break;
      double next = next_window();
      if (next < s_.window) next = std::min(s_.window, next * shrink_margin());
      if (settled(next) || round + 1 == kMaxWindowPasses || !move_to(next)) break;
    }
    return std::move(s_);
  }

 private:
  Layout layout_for(bool alpha_free) const {
    return make_layout(shape_, alpha_free, alpha_hold_, options_.fit_offset,
                       options_.fit_background, options_.fit_odd_term);
  }
  bool alpha_free_at(double window, const Values& v) const {
    return alpha_can_be_free_ &&
           window >= options_.alpha_free_min_ratio * mc::characteristic_field_t(v.lphi_m);
  }
  // The noise floor of the window (sweep_fit.hpp, "Field window"): a move
  // to a smaller window goes only as far as the upper kShrinkSigmas bound of
  // B_c allows, exp(kShrinkSigmas sd(ln B_c)) beyond B_c itself, with
  // sd(ln B_c) = 2 sd(ln L) (1 sd(ln L) for wire1d) of the length that sets
  // B_c, from this pass's covariance; a singular covariance keeps the window.
  double shrink_margin() const {
    const Covariance c = covariance_at(s_);
    if (c.singular) return kInf;
    const Values v = s_.values();
    const bool so_sets = s_.layout.ln_lso >= 0 &&
                         shape_.field_of_length(v.lso_m) > shape_.field_of_length(v.lphi_m);
    const double sd_ln_length = c.sd(so_sets ? s_.layout.ln_lso : s_.layout.ln_lphi);
    const double exponent = shape_.model == mc::Model::wire1d ? 1.0 : 2.0;
    const double margin = std::exp(kShrinkSigmas * exponent * sd_ln_length);
    return std::isfinite(margin) ? margin : kInf;
  }
  double next_window() const {
    return scales_.window_for(options_.window_factor * characteristic_field(shape_, s_.values()));
  }
  bool settled(double next) const {
    const bool alpha_same =
        alpha_free_at(next, s_.values()) == (s_.layout.alpha >= 0) || !alpha_can_be_free_;
    return std::abs(next - s_.window) <= kWindowSettle * s_.window && alpha_same;
  }
  // Moves the window to `next` (new points, alpha decided afresh, linear
  // parameters re-solved when anything changed). Returns false when it would
  // leave too few points to fit.
  bool move_to(double next) {
    std::vector<std::size_t> next_index = window_points(all_.field_t, next);
    if (next_index.size() < static_cast<std::size_t>(layout_for(false).size) + 1) return false;
    const bool new_points = next_index.size() != s_.index.size();
    s_.window = next;
    if (new_points) {
      s_.index = std::move(next_index);
      s_.data = select(all_, s_.index);
    }
    const Layout wanted = layout_for(alpha_free_at(s_.window, s_.values()));
    if (new_points || !(wanted == s_.layout)) {
      s_.theta = relayout(shape_, s_.layout, wanted, s_.data, s_.theta);
      s_.layout = wanted;
    }
    return true;
  }

  const Data& all_;
  const Shape& shape_;
  const SweepFitOptions& options_;
  const FieldScales& scales_;
  const bool alpha_can_be_free_;
  const double alpha_hold_;
  Solution s_;
};

// alpha fitted freely but not separated from L_phi (sweep_fit.hpp): its
// error above kAlphaUnresolved of its value, or alpha and ln L_phi
// degenerate, or the covariance singular.
bool alpha_unresolved(const Solution& s, const Covariance& c) {
  const Layout& l = s.layout;
  if (l.alpha < 0) return false;
  if (c.singular) return true;
  const double alpha = s.theta[static_cast<std::size_t>(l.alpha)];
  return !(c.sd(l.alpha) <= kAlphaUnresolved * std::abs(alpha)) ||
         std::abs(c.corr(l.alpha, l.ln_lphi)) > kDegenerateCorrelation;
}

// The data reject the held alpha: on the held fit's own window, alpha
// fitted freely (one LM pass from the held solution) lowers chi-square by
// more than kHeldRejectSigmas^2 in units of the point variance (the
// likelihood-ratio test of one parameter, 3 sigma), so alpha_default is not
// what the sweep shows (an antilocalizing sample fitted with hln2d, say) and
// the free fit stands.
bool held_rejected(const Solution& held, const Covariance& held_c, const Shape& shape,
                   const SweepFitOptions& options, const FieldScales& scales) {
  Solution free = held;
  free.layout = make_layout(shape, true, held.layout.alpha_held, options.fit_offset,
                            options.fit_background, options.fit_odd_term);
  if (free.layout.size > 5) return false;
  free.theta = relayout(shape, held.layout, free.layout, held.data, held.theta);
  free.pass = levenberg_marquardt(shape, free.layout, free.data,
                                  length_bounds(shape, scales.field_step, free.window),
                                  options.max_iterations, free.theta, free.residuals,
                                  free.jacobian_columns);
  const Covariance free_c = covariance_at(free);
  if (!std::isfinite(free_c.chi2) || !std::isfinite(held_c.chi2)) return false;
  const double variance = free.data.errors_known ? 1.0 : free_c.chi2_red;
  if (!(variance > 0.0) || !std::isfinite(variance)) return false;
  return (held_c.chi2 - free_c.chi2) / variance > kHeldRejectSigmas * kHeldRejectSigmas;
}

// The fitted parameters in SI units with their errors, and the fit's summary.
void report(SweepFitResult& result, const Solution& s, const Covariance& c,
            const FieldScales& scales) {
  const Layout& layout = s.layout;
  const Values v = s.values();
  result.ok = true;
  result.lphi_m = v.lphi_m;
  result.lphi_err_m = v.lphi_m * c.sd(layout.ln_lphi);
  if (result.model == mc::Model::hln2d) {
    result.alpha = v.alpha;
    result.alpha_err = layout.alpha >= 0 ? c.sd(layout.alpha) : 0.0;
    if (layout.alpha >= 0) result.corr_alpha_lphi = c.corr(layout.alpha, layout.ln_lphi);
  }
  if (layout.ln_lso >= 0) {
    result.lso_m = v.lso_m;
    result.lso_err_m = v.lso_m * c.sd(layout.ln_lso);
    result.corr_lso_lphi = c.corr(layout.ln_lso, layout.ln_lphi);
  }
  if (layout.offset >= 0) {
    result.offset_s = v.offset * kWl;
    result.offset_err_s = c.sd(layout.offset) * kWl;
  }
  if (layout.background >= 0) {
    result.background_s_per_t2 = v.background * kWl;
    result.background_err_s_per_t2 = c.sd(layout.background) * kWl;
  }
  if (layout.odd >= 0) {
    result.odd_s_per_t = v.odd * kWl;
    result.odd_err_s_per_t = c.sd(layout.odd) * kWl;
  }
  result.chi2 = c.chi2;
  result.chi2_red = c.chi2_red;
  result.n_points = s.data.size();
  result.field_window_t = std::min(s.window, scales.max_field);
  result.b_phi_t = mc::characteristic_field_t(v.lphi_m);
  result.iterations = s.iterations;
  result.converged = s.pass.converged;
  result.termination = s.pass.termination;
}

bool dimensionality_mismatch(const SweepFitOptions& options, double lphi_m) {
  const double t = options.geometry.thickness_m, w = options.geometry.width_m;
  switch (options.model) {
    case mc::Model::hln2d:
    case mc::Model::hln2d_so:
      return t > 0.0 && lphi_m < t;
    case mc::Model::wire1d:
      return lphi_m < w || (t > 0.0 && lphi_m < t);
    case mc::Model::kawabata3d:
      return lphi_m > kThreeDimensionalSlack * t;
  }
  return false;
}

// The quality flags of a reported fit (thresholds in the header).
void add_quality_flags(SweepFitResult& result, const Solution& s, const Covariance& c,
                       const Shape& shape, const SweepFitOptions& options,
                       const FieldScales& scales) {
  const Layout& layout = s.layout;
  const Values v = s.values();
  const double b_c = characteristic_field(shape, v);
  if (result.field_window_t < kNarrowWindowRatio * b_c) add_flag(result, Flag::window_too_narrow);
  if (alpha_may_be_free(options) && layout.alpha < 0) add_flag(result, Flag::alpha_held);
  if (layout.odd >= 0) add_flag(result, Flag::odd_term_fitted);
  if (c.singular ||
      (layout.alpha >= 0 && std::abs(result.corr_alpha_lphi) > kDegenerateCorrelation))
    add_flag(result, Flag::alpha_lphi_degenerate);
  if (!s.pass.converged) add_flag(result, Flag::not_converged);
  const double mfp = options.geometry.mean_free_path_m;
  if (mfp > 0.0 && (result.field_window_t > scales.transport_field || v.lphi_m < mfp))
    add_flag(result, Flag::outside_diffusive);
  if (dimensionality_mismatch(options, v.lphi_m)) add_flag(result, Flag::dimensionality_mismatch);
  const std::size_t p = static_cast<std::size_t>(layout.size);
  if (s.data.size() < std::max<std::size_t>(kMinWindowPoints, 3 * p))
    add_flag(result, Flag::too_few_points);
  const Bounds bounds = length_bounds(shape, scales.field_step, s.window);
  for (int k : {layout.ln_lphi, layout.ln_lso}) {
    if (k < 0) continue;
    const double ln_length = s.theta[static_cast<std::size_t>(k)];
    const bool at_bound = ln_length <= bounds.ln_lower || ln_length >= bounds.ln_upper;
    const bool unresolved =
        shape.field_of_length(std::exp(ln_length)) < kResolvedStepFraction * scales.field_step;
    if (at_bound || unresolved) add_flag(result, Flag::parameter_at_limit);
  }
}

// The F-test of the fitted model against the sweep without weak
// localization: the same window's points fitted by the linear terms alone
// (offset, background, odd term, as the options fit them; none is the
// constant 0). Returns the p-value of the chi-square reduction the model's
// extra parameters bought, or 0 (a signal) when the test cannot be formed.
struct SignalTest {
  double f = 0.0, p = 0.0;
};

SignalTest signal_test(const Solution& s, const Covariance& c) {
  const Layout& l = s.layout;
  const Data& d = s.data;
  // Normal equations of the linear terms in one pass over the points: the
  // weighted design row x (offset, background, odd term as fitted) and
  // target w y; chi2_flat = sum (w y)^2 - rhs^T coef at the solution.
  const bool offset = l.offset >= 0, background = l.background >= 0, odd = l.odd >= 0;
  const int q = (offset ? 1 : 0) + (background ? 1 : 0) + (odd ? 1 : 0);
  Eigen::MatrixXd normal = Eigen::MatrixXd::Zero(q, q);
  Eigen::VectorXd rhs = Eigen::VectorXd::Zero(q);
  double yy = 0.0;
  for (std::size_t i = 0; i < d.size(); ++i) {
    const double w = d.weight[i], b = d.field_t[i], wy = w * d.y[i];
    std::array<double, 3> x{};
    int k = 0;
    if (offset) x[static_cast<std::size_t>(k++)] = w;
    if (background) x[static_cast<std::size_t>(k++)] = w * b * b;
    if (odd) x[static_cast<std::size_t>(k++)] = w * b;
    yy += wy * wy;
    for (int a = 0; a < q; ++a) {
      rhs[a] += x[static_cast<std::size_t>(a)] * wy;
      for (int e = 0; e <= a; ++e)
        normal(a, e) += x[static_cast<std::size_t>(a)] * x[static_cast<std::size_t>(e)];
    }
  }
  double chi2_flat = yy;
  if (q > 0) {
    const Eigen::MatrixXd full = normal.selfadjointView<Eigen::Lower>();
    chi2_flat -= rhs.dot(full.ldlt().solve(rhs));
  }
  const double extra = static_cast<double>(l.size - q);
  const double dof = static_cast<double>(d.size()) - static_cast<double>(l.size);
  SignalTest t;
  if (!(extra > 0.0) || !(dof > 0.0) || !(c.chi2 > 0.0) || !std::isfinite(chi2_flat)) return t;
  t.f = std::max(0.0, (chi2_flat - c.chi2) / extra) / (c.chi2 / dof);
  if (!std::isfinite(t.f)) return t;
  t.p = boost::math::cdf(boost::math::complement(boost::math::fisher_f(extra, dof), t.f));
  return t;
}

SweepFitResult failed(SweepFitResult result, std::string message) {
  result.ok = false;
  result.error = std::move(message);
  return result;
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
    case Flag::odd_term_fitted:
      return "odd-term-fitted";
    case Flag::no_signal:
      return "no-signal";
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
  if (std::string problem = check_options(options); !problem.empty())
    return failed(std::move(result), std::move(problem));
  if (std::string problem = check_points(points, sigma_err_s); !problem.empty())
    return failed(std::move(result), std::move(problem));

  const Data all = fit_form(points, sigma_err_s, options.model);
  const Shape shape = shape_of(options);
  const FieldScales scales = field_scales(all, options, shape);
  WindowSearch search(all, shape, options, scales);
  if (!search.enough_points()) {
    add_flag(result, Flag::too_few_points);
    return failed(std::move(result), search.too_few_points());
  }
  search.start();
  Solution solution = std::move(search).solve();
  Covariance covariance = covariance_at(solution);
  if (alpha_unresolved(solution, covariance)) {
    WindowSearch held(all, shape, options, scales, /*hold_alpha=*/true);
    held.start();
    Solution held_solution = std::move(held).solve();
    Covariance held_covariance = covariance_at(held_solution);
    if (!held_rejected(held_solution, held_covariance, shape, options, scales)) {
      solution = std::move(held_solution);
      covariance = std::move(held_covariance);
    }
  }
  report(result, solution, covariance, scales);
  add_quality_flags(result, solution, covariance, shape, options, scales);
  if (const SignalTest t = signal_test(solution, covariance); t.p > kNoSignalP) {
    add_flag(result, Flag::no_signal);
    result.lphi_m = result.lphi_err_m = std::numeric_limits<double>::quiet_NaN();
    result.b_phi_t = std::numeric_limits<double>::quiet_NaN();
    std::string message =
        fmt::format("no weak-localization signal above the noise within {:.3g} T: the model "
                    "improves on a flat sweep by F = {:.3g} (p = {:.2g} > {:.0e}), so L_phi "
                    "is not determined",
                    result.field_window_t, t.f, t.p, kNoSignalP);
    return failed(std::move(result), std::move(message));
  }
  return result;
}

}  // namespace lphi::fit
