// The fit function of one sweep fit (analysis/sweep_fit.hpp), shared by
// analysis/sweep_fit.cpp and the Levenberg-Marquardt solves of
// analysis/internal/sweep_fit_lm.hpp: the model and its geometry, the
// parameter layout, the points of one pass and the two evaluations the solver
// asks for. Internal to the fit; nothing outside analysis/ (and its tests)
// includes it.
//
// The solves for 1 to 5 parameters are instantiated in a translation
// unit each (analysis/sweep_fit_lm.cpp.in, one per count) so that they
// compile in parallel; sweep_fit.cpp calls them through the declarations
// below.
#pragma once

#include <algorithm>
#include <array>
#include <cmath>
#include <cstddef>
#include <limits>
#include <memory>
#include <span>
#include <string>
#include <vector>

#include "analysis/constants.hpp"
#include "analysis/magnetoconductance.hpp"
#include "analysis/internal/special_functions.hpp"

namespace lphi::fit::detail {

inline constexpr double kInf = std::numeric_limits<double>::infinity();
inline constexpr double kHbar = si::hbar_j_s;
inline constexpr double kE = si::elementary_charge_c;

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

  // The field at which a length leaves the low-field regime
  // (analysis/sweep_fit.hpp) and its inverse.
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
  int odd = -1;  // k |B|, the odd-in-B term (SweepFitOptions::fit_odd_term)
  int size = 1;
  double alpha_held = 1.0;  // used when alpha is not a parameter (hln2d)

  bool operator==(const Layout&) const = default;
};

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

// Every parameter in natural form, whether fitted or not.
struct Values {
  double lphi_m = 0, lso_m = 0, alpha = 1, offset = 0, background = 0, odd = 0;
};

inline Values unpack(const Layout& l, const double* theta) {
  Values v;
  v.lphi_m = std::exp(theta[l.ln_lphi]);
  if (l.ln_lso >= 0) v.lso_m = std::exp(theta[l.ln_lso]);
  v.alpha = l.alpha >= 0 ? theta[l.alpha] : l.alpha_held;
  if (l.offset >= 0) v.offset = theta[l.offset];
  if (l.background >= 0) v.background = theta[l.background];
  if (l.odd >= 0) v.odd = theta[l.odd];
  return v;
}

// Weighted residuals w_i (f(B_i) - y_i) and their derivatives (column-major,
// n x layout.size, column k at jacobian + k n), all from the analytic
// gradients. Value and Jacobian come out of one pass because the model's
// gradient functions return both for little more than the value alone.
void evaluate(const Shape& shape, const Layout& l, const Data& d, const double* theta,
              double* residuals, double* jacobian, std::span<special::BracketAndSlope> scratch);

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

struct PassResult {
  int iterations = 0;
  bool converged = false;
  std::string termination;
};

// One Levenberg-Marquardt solve with P = layout.size parameters from theta
// (analysis/internal/sweep_fit_lm.hpp). On return theta is the solution and residuals and
// jacobian (column-major, n x P) are those at it.
template <int P>
PassResult tiny_solve(Evaluations& evaluations, bool errors_known, int max_iterations,
                      std::vector<double>& theta, std::vector<double>& residuals,
                      std::vector<double>& jacobian);
extern template PassResult tiny_solve<1>(Evaluations&, bool, int, std::vector<double>&,
                                         std::vector<double>&, std::vector<double>&);
extern template PassResult tiny_solve<2>(Evaluations&, bool, int, std::vector<double>&,
                                         std::vector<double>&, std::vector<double>&);
extern template PassResult tiny_solve<3>(Evaluations&, bool, int, std::vector<double>&,
                                         std::vector<double>&, std::vector<double>&);
extern template PassResult tiny_solve<4>(Evaluations&, bool, int, std::vector<double>&,
                                         std::vector<double>&, std::vector<double>&);
extern template PassResult tiny_solve<5>(Evaluations&, bool, int, std::vector<double>&,
                                         std::vector<double>&, std::vector<double>&);

}  // namespace lphi::fit::detail
