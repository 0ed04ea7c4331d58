#include "daemon/health/status_reply.hpp"

#include <sys/stat.h>

#include "daemon/store/database.hpp"

namespace lphi::health {

using nlohmann::json;

namespace {

std::int64_t file_size(const std::string& path) {
  struct stat st {};
  if (::stat(path.c_str(), &st) != 0) return 0;
  return static_cast<std::int64_t>(st.st_size);
}

template <class T>
json optional_json(const std::optional<T>& v) {
  return v ? json(*v) : json(nullptr);
}

json source_json(const ingest::SourceStatus& s, double now_unix) {
  json j = {{"name", s.name},
            {"kind", protocol::kind_name(s.kind)},
            {"accepted", s.accepted},
            {"duplicates", s.duplicates},
            {"rejected", s.rejected},
            {"rate_per_s", s.rate_per_s}};
  j["highest_seq"] = optional_json(s.highest_seq);
  j["last_t"] = optional_json(s.last_t);
  // Wall seconds since a reading last arrived: the readings' own t may run
  // ahead of this clock (an accelerated simulated instrument) or behind it.
  j["age_s"] = s.last_arrival_unix ? json(now_unix - *s.last_arrival_unix) : json(nullptr);
  j["last_arrival_unix"] = optional_json(s.last_arrival_unix);
  if (!s.instrument_identity.empty()) j["identity"] = s.instrument_identity;
  return j;
}

json writer_json(const store::WriterStats& w, bool backpressure) {
  return {{"queued_readings", w.queued_readings},
          {"queued_batches", w.queued_jobs},
          {"lag_s", w.oldest_queued_age_s},
          {"commits", w.commits},
          {"failed_commits", w.failed_commits},
          {"readings_committed", w.readings_committed},
          {"commit_p50_s", w.commit_p50_s},
          {"commit_p99_s", w.commit_p99_s},
          {"commit_p999_s", w.commit_p999_s},
          {"commit_max_s", w.commit_max_s},
          {"checkpoints", w.checkpoints},
          {"failed", w.failed},
          {"last_error", w.last_error},
          {"backpressure", backpressure}};
}

json failed_parts_json(const std::vector<FailedPart>& parts) {
  json out = json::array();
  for (const auto& p : parts) out.push_back({{"part", p.part}, {"error", p.error}, {"at", p.at_unix > 0.0 ? json(p.at_unix) : json(nullptr)}});
  return out;
}

}  // namespace

json status_reply(const DaemonStatus& s) {
  json sources = json::array();
  for (const auto& src : s.ingest.sources) sources.push_back(source_json(src, s.now_unix));
  json samples = json::array();
  for (const auto& c : s.samples) samples.push_back(sample_counts_json(c));
  return {{"type", "status"},
          {"pid", s.pid},
          {"uptime_s", s.now_unix - s.ingest.started_unix},
          {"database_bytes", s.database_bytes},
          {"counters", s.ingest.counters.to_json()},
          {"writer", writer_json(s.ingest.writer, s.ingest.backpressure)},
          {"sources", std::move(sources)},
          {"drivers", s.drivers},
          {"failed_parts", failed_parts_json(s.failed_parts)},
          {"samples", std::move(samples)}};
}

std::int64_t database_bytes(const std::string& data_dir) {
  const std::string db = store::database_path(data_dir);
  return file_size(db) + file_size(db + "-wal");
}

}  // namespace lphi::health
