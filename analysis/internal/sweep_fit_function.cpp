// The fit function of one sweep fit: weighted residuals and their analytic
// Jacobian for every model (analysis/internal/sweep_fit_function.hpp).
#include "analysis/internal/sweep_fit_function.hpp"

#include <cmath>
#include <cstddef>
#include <span>

#include "analysis/internal/special_functions.hpp"
#include "analysis/magnetoconductance.hpp"

namespace lphi::fit::detail {
namespace {

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
  double* const j_odd = l.odd >= 0 ? column(l.odd) : nullptr;
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
  // The odd term in a loop of its own, so that the default fit (without
  // it) pays nothing for it.
  if (j_odd != nullptr) {
    for (std::size_t i = 0; i < n; ++i) {
      j_odd[i] = d.weight[i] * field[i];
      residuals[i] += v.odd * j_odd[i];
    }
  }
}

}  // namespace

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
  double* const j_odd = l.odd >= 0 ? column(l.odd) : nullptr;
  for (std::size_t i = 0; i < n; ++i) {
    const double b = d.field_t[i];
    const double w = d.weight[i];
    const mc::ModelGradient g = shape.gradient(b, v.lphi_m, v.lso_m, v.alpha);
    residuals[i] = w * (g.value + v.offset + v.background * b * b + v.odd * b - d.y[i]);
    j_lphi[i] = w * g.d_ln_lphi;
    if (j_lso != nullptr) j_lso[i] = w * g.d_ln_lso;
    if (j_alpha != nullptr) j_alpha[i] = w * g.d_alpha;
    if (j_offset != nullptr) j_offset[i] = w;
    if (j_background != nullptr) j_background[i] = w * b * b;
    if (j_odd != nullptr) j_odd[i] = w * b;
  }
}

}  // namespace lphi::fit::detail
