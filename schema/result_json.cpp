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

nlohmann::json sweep_analysis_json(const sweep::Analysis& a) {
  nlohmann::json j = sweep_fit_json(a.fit, a.prepared);
  if (!a.fit.ok) {
    for (const char* key : {"lphi_m", "lphi_err_m", "chi2", "b_phi_t", "field_window_t"})
      j[key] = nullptr;
  }
  j["chi2_red"] = optional_json(a.chi2_red);
  j["chi2_red_quantum"] = finite_json(a.chi2_red_quantum);
  j["point_noise_s"] = finite_json(a.point_noise_s);
  j["error_scale"] = finite_json(a.error_scale);
  j["sigma0_s"] = finite_json(a.sigma0_s);
  j["sigma0_err_s"] = finite_json(a.sigma0_err_s);
  j["rsq0_ohm"] = finite_json(a.rsq0_ohm);
  j["rsq0_err_ohm"] = finite_json(a.rsq0_err_ohm);
  j["symmetrized"] = a.fitted ? nlohmann::json(a.prepared.symmetrized) : nlohmann::json(nullptr);
  j["field_offset_t"] = a.offset_known ? finite_json(a.field_offset_t) : nlohmann::json(nullptr);
  j["field_offset_err_t"] = finite_json(a.field_offset_err_t);
  j["remanent_field_t"] = finite_json(a.remanent_field_t);
  j["lag_field_t"] = finite_json(a.lag_shift_t);
  j["characteristic_field_t"] = finite_json(a.characteristic_field_t);
  j["runs_p"] = finite_json(a.runs_p);
  nlohmann::json hints = nlohmann::json::array();
  for (const fit::ModelHint& h : a.hints)
    hints.push_back({{"name", h.name},
                     {"suggested_model", std::string(mc::model_name(h.suggested))},
                     {"message", h.message},
                     {"chi2_red_fitted", h.chi2_red_fitted ? finite_json(*h.chi2_red_fitted) : nlohmann::json(nullptr)},
                     {"chi2_red_suggested", h.chi2_red_suggested ? finite_json(*h.chi2_red_suggested) : nlohmann::json(nullptr)}});
  j["hints"] = hints;
  j["field_lag_s"] = finite_json(a.field_lag_s);
  j["field_lag_err_s"] = finite_json(a.field_lag_err_s);
  j["sweep_rate_t_per_s"] = finite_json(a.sweep_rate_t_per_s);
  j["time_constant_s"] = finite_json(a.time_constant_s);
  j["max_sweep_rate_t_per_s"] = finite_json(a.max_sweep_rate_t_per_s);
  j["too_fast"] = a.too_fast;
  j["offset_large"] = a.offset_large;
  j["n_spikes"] = a.n_spikes;
  nlohmann::json legs = nlohmann::json::array();
  for (const sweep::LegAxis& l : a.legs) {
    legs.push_back({{"centre_t", finite_json(l.centre.centre_t)},
                    {"centre_err_t", finite_json(l.centre.centre_err_t)},
                    {"rate_t_per_s", finite_json(l.centre.rate_t_per_s)},
                    {"direction", l.centre.direction > 0 ? "up" : (l.centre.direction < 0 ? "down" : "unknown")},
                    {"n_readings", l.n_readings},
                    {"n_spikes", l.n_spikes},
                    {"centred", l.centre.ok},
                    {"shift_t", l.shift_t},
                    {"reason", l.centre.reason}});
  }
  j["legs"] = legs;
  j["coverage"] = {{"ok", a.coverage.ok},
                   {"reason", a.coverage.reason},
                   {"sentence", a.coverage.sentence},
                   {"advice", a.coverage.advice}};
  j["flat"] = a.flat;
  j["units_suspect"] = a.units_suspect;
  j["unit_hint"] = a.unit_hint;
  j["usable"] = a.usable;
  nlohmann::json reasons = nlohmann::json::array();
  for (const sweep::Reason& r : a.reasons) reasons.push_back({{"name", r.name}, {"sentence", r.sentence}});
  j["reasons"] = reasons;
  j["advice"] = a.advice;
  j["temperature_k"] = finite_json(a.temperature_k);
  j["error"] = a.fit.ok ? std::string() : a.fit.error;
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
