// status_reply: the one place that makes the control socket's
// {"type":"status"} reply (daemon/PROTOCOL.md) from lphid's typed state:
// the ingest server's IngestStatus, the instrument drivers' status, the
// parts that failed and each sample's analysis counts (sample_counts.hpp). A pure function of its inputs; any thread.
#pragma once

#include <cstdint>
#include <nlohmann/json.hpp>
#include <vector>

#include "daemon/health/failed_parts.hpp"
#include "daemon/health/sample_counts.hpp"
#include "daemon/ingest/ingest_status.hpp"

namespace lphi::health {

struct DaemonStatus {
  ingest::IngestStatus ingest;
  nlohmann::json drivers = nlohmann::json::array();  // DriverHost::status_json()
  std::vector<FailedPart> failed_parts;
  std::vector<SampleCounts> samples;  // each sample's drops by reason
  std::int64_t database_bytes = 0;  // the database file and its WAL
  std::int64_t pid = 0;
  double now_unix = 0.0;
};

nlohmann::json status_reply(const DaemonStatus& status);

// The size of the database in data_dir, with its WAL, in bytes.
std::int64_t database_bytes(const std::string& data_dir);

}  // namespace lphi::health
