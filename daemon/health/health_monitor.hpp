// HealthMonitor: lphid's once-a-second health, judged on the wall clock:
// turns the ingest server's typed status into the alert engine's HealthFact
// (each source's last arrival and recorded gaps, the writer's lag, the free
// space on the data directory's file system) and hands it to the engine's
// liveness rules.
//
// The gap counts come from the database through its own read-only
// connection. Thread safety: on_tick from one thread (the ingest thread's
// tick).
#pragma once

#include <memory>
#include <string>

#include "daemon/ingest/ingest_status.hpp"
#include "daemon/store/database.hpp"

namespace lphi::alerts {
class AlertEngine;
}  // namespace lphi::alerts

namespace lphi::health {

class HealthMonitor {
 public:
  // engine may be null (then on_tick does nothing).
  static Status create(const std::string& data_dir, alerts::AlertEngine* engine,
                       std::unique_ptr<HealthMonitor>& out);
  HealthMonitor(const HealthMonitor&) = delete;
  HealthMonitor& operator=(const HealthMonitor&) = delete;

  void on_tick(const ingest::IngestStatus& status);

 private:
  HealthMonitor() = default;

  std::string data_dir_;
  alerts::AlertEngine* engine_ = nullptr;
  store::Database db_;  // read-only
};

}  // namespace lphi::health
