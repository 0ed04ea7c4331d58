// RecordPublisher: tells the rest of lphid about one sample's new records,
// after they are stored: each sweep, fit and verdict is published on the
// event socket (topics "sweep", "fit", "verdict"; daemon/PROTOCOL.md) and
// handed to the alert engine as a fact (SweepFact, FitFact, VerdictFact).
//
// Records an earlier run stored and told are not told again: sweeps up to
// the index stored before this start, fits taken from the store, and the
// verdicts after those fits. Event time only (the records' own t).
//
// Thread safety: one thread (the sample's worker); the engine and the
// publisher it calls are safe from any thread.
#pragma once

#include <cstdint>
#include <map>
#include <nlohmann/json.hpp>
#include <string>

#include "daemon/live/sample_pipeline.hpp"

namespace lphi::alerts {
class AlertEngine;
class EventPublisher;
}  // namespace lphi::alerts

namespace lphi::live {

class RecordPublisher {
 public:
  // engine and events may be null (no alerts, no events).
  RecordPublisher(std::string sample, std::int64_t replayed_through, alerts::AlertEngine* engine,
                  alerts::EventPublisher* events);

  // The records of one stored step; sweep_ids: sweep index -> sweeps.id.
  void publish(const PipelineOutput& out, const std::map<std::int64_t, std::int64_t>& sweep_ids);

 private:
  void publish_sweeps(const PipelineOutput& out, const std::map<std::int64_t, std::int64_t>& sweep_ids);
  void publish_fits(const PipelineOutput& out, const std::map<std::int64_t, std::int64_t>& sweep_ids);
  void publish_verdicts(const PipelineOutput& out);
  nlohmann::json sweep_json(const SweepRecord& s, std::int64_t sweep_id) const;
  nlohmann::json fit_json(const FitRecord& f, std::int64_t sweep_id, double t_start) const;

  std::string sample_;
  std::int64_t replayed_through_ = -1;
  alerts::AlertEngine* engine_ = nullptr;
  alerts::EventPublisher* events_ = nullptr;
};

}  // namespace lphi::live
