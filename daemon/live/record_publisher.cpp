#include "daemon/live/record_publisher.hpp"

#include "daemon/alerts/alert_engine.hpp"
#include "daemon/alerts/event_publisher.hpp"
#include "schema/result_json.hpp"

namespace lphi::live {

using nlohmann::json;

RecordPublisher::RecordPublisher(std::string sample, std::int64_t replayed_through, alerts::AlertEngine* engine,
                                 alerts::EventPublisher* events)
    : sample_(std::move(sample)), replayed_through_(replayed_through), engine_(engine), events_(events) {}

json RecordPublisher::sweep_json(const SweepRecord& s, std::int64_t sweep_id) const {
  return {{"sweep_id", sweep_id},
          {"sample", sample_},
          {"index", s.index},
          {"cooldown", s.cooldown},
          {"direction", std::string(segment::direction_name(s.direction))},
          {"t_start", s.t_start_s},
          {"t_end", s.t_end_s},
          {"field_min_t", s.field_min_t},
          {"field_max_t", s.field_max_t},
          {"n_points", s.n_points},
          {"temperature_k", s.temperature.mean_k},
          {"temperature_spread_k", s.temperature.std_k},
          {"temperature_unstable", s.temperature_unstable},
          {"truncated", s.truncated},
          {"n_overload", s.n_overload},
          {"max_quadrature_ratio", schema::optional_json(s.max_quadrature_ratio)},
          {"excitation_ratio", schema::optional_json(s.excitation_ratio)},
          {"fitted", false}};
}

json RecordPublisher::fit_json(const FitRecord& f, std::int64_t sweep_id, double t_start) const {
  json j = f.result.is_object() ? f.result : json::object();
  j["sweep_id"] = sweep_id;
  j["sweep_index"] = f.sweep_index;
  j["cooldown"] = f.cooldown;
  j["sample"] = sample_;
  j["temperature_k"] = f.temperature_k;
  j["temperature_spread_k"] = f.temperature_spread_k;
  j["t_start"] = t_start;
  j["t_end"] = f.t_s;
  j["ok"] = f.ok;
  j["error"] = f.error;
  j["used_in_dephasing"] = f.used_in_dephasing;
  j["quality"] = f.quality;
  j["combined_with"] = f.combined_with ? json(*f.combined_with) : json(nullptr);
  return j;
}

void RecordPublisher::publish(const PipelineOutput& out, const std::map<std::int64_t, std::int64_t>& sweep_ids) {
  publish_sweeps(out, sweep_ids);
  publish_fits(out, sweep_ids);
  publish_verdicts(out);
}

void RecordPublisher::publish_sweeps(const PipelineOutput& out, const std::map<std::int64_t, std::int64_t>& sweep_ids) {
  for (const auto& s : out.sweeps) {
    if (s.index <= replayed_through_) continue;
    const std::int64_t id = sweep_ids.count(s.index) != 0 ? sweep_ids.at(s.index) : 0;
    if (events_ != nullptr) events_->publish("sweep", sweep_json(s, id));
    if (engine_ != nullptr) {
      alerts::SweepFact fact;
      fact.sample = sample_;
      fact.sweep_id = id;
      fact.sweep_index = s.index;
      fact.t = s.t_end_s;
      fact.temperature_unstable = s.temperature_unstable;
      fact.temperature_k = s.temperature.mean_k;
      fact.temperature_spread_k = s.temperature.std_k;
      fact.n_points = s.n_points;
      fact.n_overload = s.n_overload;
      fact.max_quadrature_ratio = s.max_quadrature_ratio;
      fact.excitation_ratio = s.excitation_ratio.value_or(0.0);
      engine_->on_sweep(fact);
    }
  }
}

void RecordPublisher::publish_fits(const PipelineOutput& out, const std::map<std::int64_t, std::int64_t>& sweep_ids) {
  std::map<std::int64_t, const SweepRecord*> by_index;
  for (const auto& s : out.sweeps) by_index[s.index] = &s;
  for (const auto& f : out.fits) {
    if (f.from_store) continue;
    const std::int64_t id = sweep_ids.count(f.sweep_index) != 0 ? sweep_ids.at(f.sweep_index) : 0;
    const std::int64_t first = f.combined_with.value_or(f.sweep_index);
    double t_start = f.t_s;
    if (auto it = by_index.find(first); it != by_index.end()) t_start = it->second->t_start_s;
    if (events_ != nullptr) events_->publish("fit", fit_json(f, id, t_start));
    if (engine_ != nullptr) {
      alerts::FitFact fact;
      fact.sample = sample_;
      fact.sweep_id = id;
      fact.sweep_index = f.sweep_index;
      fact.t = f.t_s;
      fact.ok = f.ok;
      fact.error = f.error;
      fact.converged = f.converged;
      fact.chi2_red = f.chi2_red;
      fact.lphi_m = f.lphi_m;
      fact.lphi_err_m = f.lphi_err_m;
      fact.temperature_k = f.temperature_k;
      fact.flags = f.flags;
      // The field axis and the advice, from the fit's result (the keys of
      // `lphi fit --json`; a fit that could not be centred has no offset).
      auto number = [&](const char* key) -> std::optional<double> {
        const auto it = f.result.find(key);
        if (it == f.result.end() || !it->is_number()) return std::nullopt;
        return it->get<double>();
      };
      fact.field_offset_t = number("field_offset_t");
      fact.lag_field_t = number("lag_field_t");
      // The model's characteristic field (B_phi for a film; the wire's own).
      fact.b_phi_t = number("characteristic_field_t");
      if (const auto it = f.result.find("advice"); it != f.result.end() && it->is_string())
        fact.advice = it->get<std::string>();
      engine_->on_fit(fact);
    }
  }
}

void RecordPublisher::publish_verdicts(const PipelineOutput& out) {
  std::map<std::int64_t, bool> fit_from_store;
  for (const auto& f : out.fits) fit_from_store[f.sweep_index] = f.from_store;
  for (const auto& v : out.verdicts) {
    // The verdict after a stored fit was stored (and told) before the restart.
    if (fit_from_store[v.sweep_index]) continue;
    json body = v.json;
    body["sample"] = sample_;
    if (events_ != nullptr) events_->publish("verdict", body);
    if (engine_ != nullptr) {
      alerts::VerdictFact fact;
      fact.sample = sample_;
      fact.t = v.t_s;
      fact.sweep_index = v.sweep_index;
      fact.cooldown = v.cooldown;
      fact.state = v.state;
      fact.electrons_cooling = v.electrons_cooling;
      fact.likely_cause = v.likely_cause;
      fact.t_sat_k = v.t_sat_k;
      fact.lphi_sat_m = v.lphi_sat_m;
      engine_->on_verdict(fact);
    }
  }
}

}  // namespace lphi::live
