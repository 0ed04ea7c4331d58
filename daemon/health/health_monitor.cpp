#include "daemon/health/health_monitor.hpp"

#include <sys/statvfs.h>

#include <chrono>
#include <map>
#include <spdlog/spdlog.h>

#include "daemon/alerts/alert_engine.hpp"
#include "daemon/store/analysis_tables.hpp"

namespace lphi::health {

Status HealthMonitor::create(const std::string& data_dir, alerts::AlertEngine* engine,
                             std::unique_ptr<HealthMonitor>& out) {
  std::unique_ptr<HealthMonitor> m(new HealthMonitor());
  m->data_dir_ = data_dir;
  m->engine_ = engine;
  if (auto s = store::Database::open(store::database_path(data_dir), store::OpenMode::read_only, m->db_); !s) {
    return s;
  }
  out = std::move(m);
  return Status::success();
}

void HealthMonitor::on_tick(const ingest::IngestStatus& status) {
  if (engine_ == nullptr) return;
  alerts::HealthFact fact;
  // Liveness is judged on the wall clock (alert_engine.hpp), never the analysis.
  fact.now_unix = std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
  std::map<std::string, std::uint64_t> gaps;
  if (auto s = store::gap_counts(db_, gaps); !s) spdlog::warn("health: {}", s.message());
  for (const auto& src : status.sources) {
    alerts::SourceHealth h;
    h.name = src.name;
    h.last_arrival_unix = src.last_arrival_unix;
    h.gaps = gaps[src.name];
    fact.sources.push_back(std::move(h));
  }
  struct statvfs vfs {};
  if (::statvfs(data_dir_.c_str(), &vfs) == 0) {
    fact.disk_free_bytes = static_cast<double>(vfs.f_bavail) * static_cast<double>(vfs.f_frsize);
  }
  fact.writer_lag_s = status.writer.oldest_queued_age_s;
  engine_->on_health(fact);
}

}  // namespace lphi::health
