#include "schema/result_json.hpp"

#include <cmath>
#include <string>

namespace lphi::schema {

nlohmann::json optional_json(const std::optional<double>& v) {
  return v && std::isfinite(*v) ? nlohmann::json(*v) : nlohmann::json(nullptr);
}

namespace {
nlohmann::json finite_json(double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr); }
}  // namespace

nlohmann::json sweep_fit_json(const fit::SweepFitResult& r, const conductance::PreparedSweep& prepared) {
  nlohmann::json flags = nlohmann::json::array();
  for (fit::Flag f : r.flags) flags.push_back(std::string(fit::flag_name(f)));
  nlohmann::json j;
  j["model"] = std::string(mc::model_name(r.model));
  j["lphi_m"] = finite_json(r.lphi_m);
  j["lphi_err_m"] = finite_json(r.lphi_err_m);
  j["alpha"] = optional_json(r.alpha);
  j["alpha_err"] = optional_json(r.alpha_err);
  j["lso_m"] = optional_json(r.lso_m);
  j["lso_err_m"] = optional_json(r.lso_err_m);
  j["chi2"] = finite_json(r.chi2);
  j["chi2_red"] = finite_json(r.chi2_red);
  j["n_points"] = r.n_points;
  j["field_window_t"] = finite_json(r.field_window_t);
  j["b_phi_t"] = finite_json(r.b_phi_t);
  j["converged"] = r.converged;
  j["termination"] = r.termination;
  j["iterations"] = r.iterations;
  j["flags"] = flags;
  j["offset_s"] = finite_json(r.offset_s);
  j["offset_err_s"] = finite_json(r.offset_err_s);
  j["background_s_per_t2"] = optional_json(r.background_s_per_t2);
  j["background_err_s_per_t2"] = optional_json(r.background_err_s_per_t2);
  j["odd_s_per_t"] = optional_json(r.odd_s_per_t);
  j["odd_err_s_per_t"] = optional_json(r.odd_err_s_per_t);
  j["corr_alpha_lphi"] = r.alpha ? finite_json(r.corr_alpha_lphi) : nlohmann::json(nullptr);
  j["corr_lso_lphi"] = r.lso_m ? finite_json(r.corr_lso_lphi) : nlohmann::json(nullptr);
  j["sigma0_s"] = finite_json(prepared.sigma0_s);
  j["sigma0_err_s"] = finite_json(prepared.sigma0_err_s);
  j["rsq0_ohm"] = finite_json(prepared.rsq0_ohm);
  j["max_field_t"] = finite_json(prepared.max_field_t);
  return j;
}

nlohmann::json dephasing_json(const dephasing::DephasingResult& r) {
  nlohmann::json j;
  j["state"] = std::string(dephasing::state_name(r.state));
  j["n_points"] = r.n_points;
  j["exponent_p"] = optional_json(r.exponent_p);
  j["exponent_p_err"] = optional_json(r.exponent_p_err);
  j["prefactor_b"] = optional_json(r.prefactor_b);
  j["prefactor_b_err"] = optional_json(r.prefactor_b_err);
  j["lphi_sat_m"] = optional_json(r.lphi_sat_m);
  j["lphi_sat_err_m"] = optional_json(r.lphi_sat_err_m);
  j["t_sat_k"] = optional_json(r.t_sat_k);
  j["t_sat_err_k"] = optional_json(r.t_sat_err_k);
  j["chi2_saturating"] = finite_json(r.chi2_saturating);
  j["chi2_power_law"] = finite_json(r.chi2_power_law);
  j["aic_saturating"] = finite_json(r.aic_saturating);
  j["aic_power_law"] = finite_json(r.aic_power_law);
  j["f_statistic"] = finite_json(r.f_statistic);
  j["p_value"] = finite_json(r.p_value);
  j["power_law"] = {{"prefactor_b", finite_json(r.power_law.b)},
                    {"prefactor_b_err", finite_json(r.power_law.b_err)},
                    {"exponent_p", finite_json(r.power_law.p)},
                    {"exponent_p_err", finite_json(r.power_law.p_err)},
                    {"chi2", finite_json(r.power_law.chi2)},
                    {"converged", r.power_law.converged}};
  j["n_temperatures"] = r.n_temperatures;
  j["errors_from_scatter"] = r.errors_from_scatter;
  j["expected_exponent"] = r.expected_exponent;
  j["reference_temperature_k"] = finite_json(r.reference_temperature_k);
  j["saturation_at_boundary"] = r.saturation_at_boundary;
  j["converged"] = r.converged;
  j["notes"] = r.notes;
  j["aak_ratio"] = optional_json(r.aak_ratio);
  j["aak_ratio_err"] = optional_json(r.aak_ratio_err);
  j["aak_rate_per_s_at_1k"] = optional_json(r.aak_rate_per_s_at_1k);
  if (!r.error.empty()) j["error"] = r.error;
  return j;
}

}  // namespace lphi::schema
