// What ingest has seen since lphid started: per source and in total, by reason.
#pragma once

#include <array>
#include <cstdint>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>

#include "schema/protocol/reason.hpp"

namespace lphi::ingest {

struct ReasonCounts {
  std::array<std::uint64_t, protocol::reason_count> by_reason{};
  void add(protocol::Reason reason, std::uint64_t n = 1) {
    by_reason[static_cast<std::size_t>(reason)] += n;
  }
  std::uint64_t operator[](protocol::Reason reason) const {
    return by_reason[static_cast<std::size_t>(reason)];
  }
  std::uint64_t total() const;
  // {"reason": count, ...} for the reasons that occurred.
  nlohmann::json to_json() const;
};

struct IngestCounters {
  std::uint64_t batches = 0;           // batch messages that reached the writer or were answered
  std::uint64_t accepted = 0;          // readings stored
  std::uint64_t duplicates = 0;        // readings already stored, ignored
  std::uint64_t gaps = 0;              // gaps recorded
  std::uint64_t backpressure_waits = 0;  // times a batch had to wait for room in the writer's queue
  ReasonCounts rejected_readings;      // single readings refused
  ReasonCounts refused_messages;       // whole messages refused
  nlohmann::json to_json() const;
};

// A rate from cumulative counts sampled at intervals.
class RateMeter {
 public:
  void sample(double now_s, std::uint64_t count);
  double rate_per_s() const { return rate_per_s_; }

 private:
  std::optional<double> mark_s_;
  std::uint64_t mark_count_ = 0;
  double rate_per_s_ = 0.0;
};

}  // namespace lphi::ingest
