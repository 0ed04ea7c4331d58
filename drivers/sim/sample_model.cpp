#include "drivers/sim/sample_model.hpp"

#include <cmath>

#include "analysis/constants.hpp"

#include "schema/protocol/limits.hpp"

namespace lphi::sim {
namespace {

using protocol::limits::positive;

std::string bad(const char* name, const char* rule, double got) {
  return std::string(name) + " must be " + rule + " (got " + std::to_string(got) + ")";
}

}  // namespace

std::string sample_error(const Sample& s) {
  if (!positive(s.squares)) return bad("squares", "positive", s.squares);
  if (!positive(s.drude_rsq_ohm)) return bad("rsq_ohm", "positive", s.drude_rsq_ohm);
  if (!positive(s.reference_temperature_k))
    return bad("reference_temperature_k", "positive", s.reference_temperature_k);
  if (!positive(s.diffusion_m2s)) return bad("diffusion_m2s", "positive", s.diffusion_m2s);
  if (!positive(s.mean_free_path_m)) return bad("mean_free_path_m", "positive", s.mean_free_path_m);
  if (!std::isfinite(s.alpha)) return bad("alpha", "finite", s.alpha);
  if (!std::isfinite(s.interaction_f)) return bad("interaction_f", "finite", s.interaction_f);
  switch (s.model) {
    case mc::Model::hln2d: break;
    case mc::Model::hln2d_so:
      if (!positive(s.lso_m)) return bad("lso_m", "positive for hln2d-so", s.lso_m);
      break;
    case mc::Model::wire1d:
      if (!positive(s.width_m)) return bad("width_m", "positive for wire1d", s.width_m);
      if (!std::isfinite(s.lso_m) || s.lso_m < 0) return bad("lso_m", ">= 0", s.lso_m);
      break;
    case mc::Model::kawabata3d:
      if (!positive(s.thickness_m)) return bad("thickness_m", "positive for kawabata3d", s.thickness_m);
      break;
  }
  return {};
}

std::string dephasing_error(const DephasingLaw& d) {
  if (!std::isfinite(d.gamma0_per_s) || d.gamma0_per_s < 0)
    return bad("gamma0_per_s", ">= 0", d.gamma0_per_s);
  if (!std::isfinite(d.a_per_s) || d.a_per_s < 0) return bad("a_per_s", ">= 0", d.a_per_s);
  if (!positive(d.p)) return bad("p", "positive", d.p);
  if (!(d.gamma0_per_s > 0 || d.a_per_s > 0))
    return "gamma0_per_s and a_per_s cannot both be 0 (L_phi would be infinite)";
  return {};
}

double kappa_ee(double interaction_f) { return 1.0 - 0.75 * interaction_f; }

double transport_field_t(double mean_free_path_m) {
  return si::hbar_j_s / (2.0 * si::elementary_charge_c * mean_free_path_m * mean_free_path_m);
}

double dephasing_rate_per_s(const DephasingLaw& d, double electron_temperature_k) {
  return d.gamma0_per_s + d.a_per_s * std::pow(electron_temperature_k, d.p);
}

double lphi_m(const Sample& s, const DephasingLaw& d, double electron_temperature_k) {
  return std::sqrt(s.diffusion_m2s / dephasing_rate_per_s(d, electron_temperature_k));
}

double heated_temperature_k(double bath_k, double floor_k, double exponent_k) {
  if (floor_k <= 0.0) return bath_k;
  return std::pow(std::pow(bath_k, exponent_k) + std::pow(floor_k, exponent_k), 1.0 / exponent_k);
}

double model_delta_sigma(const Sample& s, double field_t, double lphi) {
  switch (s.model) {
    case mc::Model::hln2d: return mc::hln2d(field_t, s.alpha, lphi);
    case mc::Model::hln2d_so: return mc::hln2d_so(field_t, lphi, s.lso_m);
    case mc::Model::wire1d:
      return s.lso_m > 0 ? mc::wire1d_so(field_t, lphi, s.lso_m, s.width_m)
                         : mc::wire1d(field_t, lphi, s.width_m);
    case mc::Model::kawabata3d: return mc::kawabata3d(field_t, lphi, s.thickness_m);
  }
  return std::nan("");
}

double sheet_conductance_s(const Sample& s, const DephasingLaw& d, double field_t,
                           double electron_temperature_k) {
  const double lphi = lphi_m(s, d, electron_temperature_k);
  const double b_tr = transport_field_t(s.mean_free_path_m);
  const double correction =
      kappa_ee(s.interaction_f) * std::log(electron_temperature_k / s.reference_temperature_k) +
      model_delta_sigma(s, field_t, lphi) - model_delta_sigma(s, b_tr, lphi);
  return 1.0 / s.drude_rsq_ohm + si::wl_conductance_s * correction;
}

double lockin_x_v(double sheet_resistance_ohm, double squares, double current_a, double gain) {
  return current_a * sheet_resistance_ohm * squares * gain;
}

}  // namespace lphi::sim
