#include "drivers/sim/truth_file.hpp"

#include <nlohmann/json.hpp>

namespace lphi::sim::truth {
namespace {

void add_truth(nlohmann::json& j, const Truth& t) {
  j["temperature_k"] = t.temperature_k;
  j["electron_temperature_k"] = t.electron_temperature_k;
  j["lphi_m"] = t.lphi_m;
  j["sigma0_s"] = t.sigma0_s;
  j["heating"] = t.heating;
  j["manual_field"] = t.manual_field;
  j["field_offset_t"] = t.field_offset_t;
  j["field_lag_s"] = t.field_lag_s;
  j["lockin_time_constant_s"] = t.lockin_time_constant_s;
  j["gain_factor"] = t.gain_factor;
  j["temperature_start_k"] = t.temperature_start_k;
  j["temperature_end_k"] = t.temperature_end_k;
  j["lockin_hole"] = t.lockin_hole;
  if (t.lockin_hole) {
    j["hole_from_t"] = t.hole_from_t;
    j["hole_to_t"] = t.hole_to_t;
  }
}

// The faults of issue-style measurement trouble, with their parameters as
// the scenario file gave them (the instrument faults of the served run,
// dropouts and resets, are not analysis truth and are left out).
nlohmann::json fault_list(const Scenario& s) {
  const Faults& f = s.faults;
  nlohmann::json out = nlohmann::json::array();
  for (const auto& m : f.remanences)
    out.push_back({{"kind", "remanent-field"}, {"field_t", m.field_t}, {"start_s", m.start_s}});
  if (f.field_lag_s > 0.0) out.push_back({{"kind", "field-reading-lag"}, {"delay_s", f.field_lag_s}});
  for (const auto& c : f.time_constants)
    out.push_back({{"kind", "lockin-time-constant"}, {"time_constant_s", c.time_constant_s},
                   {"start_s", c.start_s}, {"duration_s", c.duration_s}});
  for (const auto& h : f.holes)
    out.push_back({{"kind", "lockin-hole"}, {"from_t", h.from_t}, {"to_t", h.to_t},
                   {"start_s", h.start_s}, {"duration_s", h.duration_s}});
  if (f.plateau_drift_relative != 0.0)
    out.push_back({{"kind", "plateau-drift"}, {"relative", f.plateau_drift_relative}});
  if (f.gain_drift_per_hour != 0.0)
    out.push_back({{"kind", "gain-drift"}, {"per_hour", f.gain_drift_per_hour},
                   {"start_s", f.gain_drift_start_s}});
  if (f.spike_probability > 0.0)
    out.push_back({{"kind", "spikes"}, {"probability", f.spike_probability},
                   {"size_sigma", f.spike_size_sigma},
                   {"size_v", f.spike_size_sigma * s.noise.lockin_x_v}});
  return out;
}

}  // namespace

std::string scenario_record(const Scenario& s) {
  const Sample& m = s.sample;
  nlohmann::json j;
  j["record"] = "scenario";
  j["name"] = s.name;
  j["seed"] = s.seed;
  j["sample"] = {{"model", std::string(mc::model_name(m.model))},
                 {"squares", m.squares},
                 {"width_m", m.width_m},
                 {"thickness_m", m.thickness_m},
                 {"rsq_ohm", m.drude_rsq_ohm},
                 {"reference_temperature_k", m.reference_temperature_k},
                 {"diffusion_m2s", m.diffusion_m2s},
                 {"mean_free_path_m", m.mean_free_path_m},
                 {"alpha", m.alpha},
                 {"lso_m", m.lso_m},
                 {"interaction_f", m.interaction_f},
                 {"kappa_ee", kappa_ee(m.interaction_f)},
                 {"transport_field_t", transport_field_t(m.mean_free_path_m)}};
  j["dephasing"] = {{"gamma0_per_s", s.dephasing.gamma0_per_s},
                    {"a_per_s", s.dephasing.a_per_s},
                    {"p", s.dephasing.p}};
  j["lockin"] = {{"current_a", s.lockin.current_a},
                 {"gain", s.lockin.gain},
                 {"quadrature_fraction", s.lockin.quadrature_fraction},
                 {"time_constant_s", s.lockin.time_constant_s}};
  j["heating"] = {{"on", s.faults.heating},
                  {"start_s", s.faults.heating_start_s},
                  {"duration_s", s.faults.heating_duration_s},
                  {"floor_k", s.faults.heating_floor_k},
                  {"exponent", s.faults.heating_exponent}};
  j["noise"] = {{"sample_interval_s", s.noise.sample_interval_s},
                {"lockin_x_v", s.noise.lockin_x_v},
                {"lockin_y_v", s.noise.lockin_y_v},
                {"temperature_rel", s.noise.temperature_rel},
                {"field_t", s.noise.field_t}};
  j["faults"] = fault_list(s);
  return j.dump();
}

std::string plateau_record(const World& w, const PlannedPlateau& p) {
  nlohmann::json j;
  j["record"] = "plateau";
  j["plateau"] = p.index;
  j["nominal_temperature_k"] = p.temperature_k;
  j["start_s"] = p.reached_s;
  j["end_s"] = p.end_s;
  j["sweep_mode"] = sweep_mode_name(w.scenario().programme.plateaus[p.index].sweep_mode);
  add_truth(j, w.truth(p.reached_s, p.end_s));
  return j.dump();
}

std::string sweep_record(const World& w, const PlannedSweep& s) {
  nlohmann::json j;
  j["record"] = "sweep";
  j["plateau"] = s.plateau;
  j["sweep"] = s.index;
  j["start_s"] = s.start_s;
  j["end_s"] = s.end_s;
  j["from_t"] = s.from_t;
  j["to_t"] = s.to_t;
  add_truth(j, w.truth(s.start_s, s.end_s));
  return j.dump();
}

}  // namespace lphi::sim::truth
