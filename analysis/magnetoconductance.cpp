#include "analysis/magnetoconductance.hpp"

#include <cmath>
#include <limits>
#include <sstream>

#include "analysis/constants.hpp"
#include "analysis/internal/special_functions.hpp"

namespace lphi::mc {
namespace {

constexpr double nan = std::numeric_limits<double>::quiet_NaN();
constexpr double two_pi = 2.0 * si::pi;

// hbar/(4e): B_phi = hbar_over_4e / L_phi^2.
constexpr double hbar_over_4e = si::hbar_j_s / (4.0 * si::elementary_charge_c);
// e/hbar: the inverse magnetic flux quantum per 2 pi, in 1/(T m^2).
constexpr double e_over_hbar = si::elementary_charge_c / si::hbar_j_s;

bool positive_finite(double v) { return v > 0.0 && std::isfinite(v); }
bool positive_or_infinite(double v) { return v > 0.0; }  // rejects NaN too

// B_so = hbar/(4 e L_so^2); L_so = +infinity (no spin-orbit) gives 0.
double spin_orbit_field_t(double lso_m) {
  return std::isinf(lso_m) ? 0.0 : hbar_over_4e / (lso_m * lso_m);
}

// 1/L_B^2 = e^2 w^2 B^2 / (3 hbar^2) for the quasi-1D wire.
double inverse_lb_squared(double field_t, double width_m) {
  const double q = e_over_hbar * width_m * field_t;
  return q * q / 3.0;
}

// g(q, k) = q^(-1/2) - (q + k)^(-1/2) for q > 0, k >= 0, written as
// k / (sqrt(q) sqrt(q + k) (sqrt(q) + sqrt(q + k))): no cancellation at small k.
// Also returns dg/dq = -(1/2) (q^(-3/2) - (q + k)^(-3/2))
//                    = -(1/2) g (a^2 + a b + b^2),  a = q^(-1/2), b = (q + k)^(-1/2).
struct WireTerm {
  double g = 0.0;
  double dg_dq = 0.0;
};
WireTerm wire_term(double q, double k) {
  const double sq = std::sqrt(q);
  const double sqk = std::sqrt(q + k);
  const double g = k / (sq * sqk * (sq + sqk));
  const double a = 1.0 / sq;
  const double b = 1.0 / sqk;
  return {g, -0.5 * g * (a * a + a * b + b * b)};
}

std::string describe(std::string_view name, double v, std::string_view requirement) {
  std::ostringstream out;
  out.precision(6);
  out << name << " must be " << requirement << " (got " << v << ")";
  return out.str();
}

}  // namespace

std::string_view model_name(Model m) {
  switch (m) {
    case Model::hln2d: return "hln2d";
    case Model::hln2d_so: return "hln2d-so";
    case Model::wire1d: return "wire1d";
    case Model::kawabata3d: return "kawabata3d";
  }
  return "unknown";
}

std::optional<Model> model_from_name(std::string_view name) {
  for (Model m : {Model::hln2d, Model::hln2d_so, Model::wire1d, Model::kawabata3d})
    if (model_name(m) == name) return m;
  return std::nullopt;
}

double characteristic_field_t(double length_m) {
  if (!positive_or_infinite(length_m)) return nan;
  return std::isinf(length_m) ? 0.0 : hbar_over_4e / (length_m * length_m);
}

double characteristic_length_m(double field_t) {
  if (!positive_or_infinite(field_t)) return nan;
  return std::sqrt(hbar_over_4e / field_t);
}

std::string parameter_error(Model model, double field_t, double alpha, double lphi_m,
                            double lso_m, double geometry_m) {
  if (!std::isfinite(field_t)) return describe("field_t", field_t, "finite");
  if (!positive_finite(lphi_m)) return describe("lphi_m", lphi_m, "positive and finite");
  switch (model) {
    case Model::hln2d:
      if (!std::isfinite(alpha)) return describe("alpha", alpha, "finite");
      break;
    case Model::hln2d_so:
      if (!positive_or_infinite(lso_m)) return describe("lso_m", lso_m, "positive");
      break;
    case Model::wire1d:
      if (lso_m != 0.0 && !positive_or_infinite(lso_m))
        return describe("lso_m", lso_m, "positive (or 0 for no spin-orbit)");
      if (!positive_finite(geometry_m))
        return describe("width_m", geometry_m, "positive and finite");
      break;
    case Model::kawabata3d:
      if (!positive_finite(geometry_m))
        return describe("thickness_m", geometry_m, "positive and finite");
      break;
  }
  return {};
}

// ---------------------------------------------------------------------------
// hln2d: alpha b(B_phi/|B|).

ModelGradient hln2d_grad(double field_t, double alpha, double lphi_m) {
  if (!std::isfinite(field_t) || !std::isfinite(alpha) || !positive_finite(lphi_m))
    return {nan, nan, nan, nan};
  if (field_t == 0.0) return {};
  const double x = characteristic_field_t(lphi_m) / std::fabs(field_t);
  const special::BracketAndSlope b = special::wl_bracket_and_log_slope(x);
  // d x / d ln L_phi = -2 x.
  return {alpha * b.value, -2.0 * alpha * b.log_slope, 0.0, b.value};
}

double hln2d(double field_t, double alpha, double lphi_m) {
  if (!std::isfinite(field_t) || !std::isfinite(alpha) || !positive_finite(lphi_m)) return nan;
  if (field_t == 0.0) return 0.0;
  return alpha * special::wl_bracket(characteristic_field_t(lphi_m) / std::fabs(field_t));
}

// ---------------------------------------------------------------------------
// hln2d_so: b(x1) + b(x2)/2 - b(x_phi)/2 with x_phi = B_phi/B,
// x1 = (B_phi + B_so)/B, x2 = (B_phi + 2 B_so)/B.

ModelGradient hln2d_so_grad(double field_t, double lphi_m, double lso_m) {
  if (!std::isfinite(field_t) || !positive_finite(lphi_m) || !positive_or_infinite(lso_m))
    return {nan, nan, nan, nan};
  if (field_t == 0.0) return {};
  const double b_phi = characteristic_field_t(lphi_m);
  const double b_so = spin_orbit_field_t(lso_m);
  const double abs_b = std::fabs(field_t);
  const double b1 = b_phi + b_so;
  const double b2 = b_phi + 2.0 * b_so;
  const special::BracketAndSlope t_phi = special::wl_bracket_and_log_slope(b_phi / abs_b);
  const special::BracketAndSlope t1 = special::wl_bracket_and_log_slope(b1 / abs_b);
  const special::BracketAndSlope t2 = special::wl_bracket_and_log_slope(b2 / abs_b);
  ModelGradient g;
  g.value = t1.value + 0.5 * t2.value - 0.5 * t_phi.value;
  // d x_i / d ln L_phi = -2 B_phi/B and d x_i / d ln L_so = -2 (i) B_so/B for
  // x_i = (B_phi + i B_so)/B; b'(x_i) = slope_i / x_i.
  g.d_ln_lphi = -2.0 * (b_phi / b1) * t1.log_slope - (b_phi / b2) * t2.log_slope + t_phi.log_slope;
  g.d_ln_lso = -2.0 * ((b_so / b1) * t1.log_slope + (b_so / b2) * t2.log_slope);
  return g;
}

double hln2d_so(double field_t, double lphi_m, double lso_m) {
  if (!std::isfinite(field_t) || !positive_finite(lphi_m) || !positive_or_infinite(lso_m))
    return nan;
  if (field_t == 0.0) return 0.0;
  const double b_phi = characteristic_field_t(lphi_m);
  const double b_so = spin_orbit_field_t(lso_m);
  const double abs_b = std::fabs(field_t);
  return special::wl_bracket((b_phi + b_so) / abs_b) +
         0.5 * special::wl_bracket((b_phi + 2.0 * b_so) / abs_b) -
         0.5 * special::wl_bracket(b_phi / abs_b);
}

// ---------------------------------------------------------------------------
// wire1d: (2 pi / w) [L_phi - (1/L_phi^2 + 1/L_B^2)^(-1/2)]
//       = (2 pi / w) L_phi u / (s (s + 1)),  u = L_phi^2 / L_B^2, s = sqrt(1 + u),
// since 1 - 1/s = (s^2 - 1)/(s (s + 1)). Low field: (2 pi / w) L_phi^3 / (2 L_B^2).

ModelGradient wire1d_grad(double field_t, double lphi_m, double width_m) {
  if (!std::isfinite(field_t) || !positive_finite(lphi_m) || !positive_finite(width_m))
    return {nan, nan, nan, nan};
  if (field_t == 0.0) return {};
  const double u = lphi_m * lphi_m * inverse_lb_squared(field_t, width_m);
  const double s = std::sqrt(1.0 + u);
  const double scale = two_pi * lphi_m / width_m;
  ModelGradient g;
  g.value = scale * u / (s * (s + 1.0));
  // d/d ln L_phi of L_phi (1 - (1 + u)^(-1/2)) with d u / d ln L_phi = 2u:
  // L_phi [(1 - 1/s) + u / s^3].
  g.d_ln_lphi = scale * u * (1.0 / (s * (s + 1.0)) + 1.0 / (s * s * s));
  return g;
}

double wire1d(double field_t, double lphi_m, double width_m) {
  return wire1d_grad(field_t, lphi_m, width_m).value;
}

// ---------------------------------------------------------------------------
// wire1d_so: (2 pi / w) [(3/2) g(q, k) - (1/2) g(p, k)] with p = 1/L_phi^2,
// q = p + 4/(3 L_so^2), k = 1/L_B^2 and g(q, k) = q^(-1/2) - (q + k)^(-1/2):
// the published form minus its value at B = 0.

ModelGradient wire1d_so_grad(double field_t, double lphi_m, double lso_m, double width_m) {
  if (!std::isfinite(field_t) || !positive_finite(lphi_m) || !positive_or_infinite(lso_m) ||
      !positive_finite(width_m))
    return {nan, nan, nan, nan};
  if (field_t == 0.0) return {};
  const double k = inverse_lb_squared(field_t, width_m);
  const double p = 1.0 / (lphi_m * lphi_m);
  const double r = std::isinf(lso_m) ? 0.0 : 4.0 / (3.0 * lso_m * lso_m);
  const double q = p + r;
  const WireTerm triplet = wire_term(q, k);
  const WireTerm singlet = wire_term(p, k);
  const double scale = two_pi / width_m;
  ModelGradient g;
  g.value = scale * (1.5 * triplet.g - 0.5 * singlet.g);
  // d p / d ln L_phi = d q / d ln L_phi = -2p;  d q / d ln L_so = -2r.
  g.d_ln_lphi = scale * p * (-3.0 * triplet.dg_dq + singlet.dg_dq);
  g.d_ln_lso = -3.0 * scale * r * triplet.dg_dq;
  return g;
}

double wire1d_so(double field_t, double lphi_m, double lso_m, double width_m) {
  return wire1d_so_grad(field_t, lphi_m, lso_m, width_m).value;
}

// ---------------------------------------------------------------------------
// kawabata3d: t sqrt(e|B|/hbar) f3(B_phi/|B|).

ModelGradient kawabata3d_grad(double field_t, double lphi_m, double thickness_m) {
  if (!std::isfinite(field_t) || !positive_finite(lphi_m) || !positive_finite(thickness_m))
    return {nan, nan, nan, nan};
  if (field_t == 0.0) return {};
  const double abs_b = std::fabs(field_t);
  const double d = characteristic_field_t(lphi_m) / abs_b;
  const special::F3AndSlope f = special::kawabata_f3_and_log_slope(d);
  const double scale = thickness_m * std::sqrt(e_over_hbar * abs_b);
  // d d / d ln L_phi = -2 d.
  return {scale * f.value, -2.0 * scale * f.log_slope, 0.0, 0.0};
}

double kawabata3d(double field_t, double lphi_m, double thickness_m) {
  if (!std::isfinite(field_t) || !positive_finite(lphi_m) || !positive_finite(thickness_m))
    return nan;
  if (field_t == 0.0) return 0.0;
  const double abs_b = std::fabs(field_t);
  return thickness_m * std::sqrt(e_over_hbar * abs_b) *
         special::kawabata_f3(characteristic_field_t(lphi_m) / abs_b);
}

}  // namespace lphi::mc
