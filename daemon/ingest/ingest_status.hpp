// IngestStatus: what the ingest server reports about itself, as a value: its
// counters, each source's state and ages, and the store writer's statistics.
// IngestServer::status() hands out a copy (safe from any thread); the status
// reply (health/status_reply.hpp) and lphid's health tick
// (health/health_monitor.hpp) are made from it.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "daemon/ingest/counters.hpp"
#include "daemon/store/writer.hpp"
#include "schema/protocol/reading.hpp"

namespace lphi::ingest {

struct SourceStatus {
  std::string name;
  protocol::SourceKind kind = protocol::SourceKind::lockin;
  std::uint64_t accepted = 0, duplicates = 0, rejected = 0;
  double rate_per_s = 0.0;
  std::optional<std::int64_t> highest_seq;       // committed
  std::optional<double> last_t;                  // t of the newest committed reading
  std::optional<double> last_arrival_unix;       // wall time a reading last arrived
  std::string instrument_identity;               // empty: none reported
};

struct IngestStatus {
  double started_unix = 0.0;
  IngestCounters counters;
  store::WriterStats writer;
  bool backpressure = false;  // a batch waits for room in the writer's queue
  std::vector<SourceStatus> sources;  // by name
};

}  // namespace lphi::ingest
