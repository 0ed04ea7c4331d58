#include "daemon/ingest/counters.hpp"

namespace lphi::ingest {

std::uint64_t ReasonCounts::total() const {
  std::uint64_t n = 0;
  for (auto c : by_reason) n += c;
  return n;
}

nlohmann::json ReasonCounts::to_json() const {
  nlohmann::json j = nlohmann::json::object();
  for (std::size_t i = 0; i < by_reason.size(); ++i) {
    if (by_reason[i] != 0) j[std::string(protocol::reason_name(static_cast<protocol::Reason>(i)))] = by_reason[i];
  }
  return j;
}

nlohmann::json IngestCounters::to_json() const {
  return {{"batches", batches},
          {"accepted", accepted},
          {"duplicates", duplicates},
          {"gaps", gaps},
          {"backpressure_waits", backpressure_waits},
          {"rejected_readings", rejected_readings.to_json()},
          {"refused_messages", refused_messages.to_json()}};
}

void RateMeter::sample(double now_s, std::uint64_t count) {
  // Rates over windows of at least 5 s, so a burst does not read as a steady rate.
  constexpr double window_s = 5.0;
  if (!mark_s_) {
    mark_s_ = now_s;
    mark_count_ = count;
    return;
  }
  const double dt = now_s - *mark_s_;
  if (dt < window_s) return;
  rate_per_s_ = static_cast<double>(count - mark_count_) / dt;
  mark_s_ = now_s;
  mark_count_ = count;
}

}  // namespace lphi::ingest
