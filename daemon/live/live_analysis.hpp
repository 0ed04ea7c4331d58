// LiveAnalysis: lphid's analysis of every configured sample while readings
// arrive, and the control requests that show its results.
//
// One thread per [[sample]] runs a SamplePipeline (sample_pipeline.hpp). It
// reads the sample's three sources' committed readings from the database
// through its own read-only connection, by (source_id, seq) after a cursor,
// a chunk at a time, merges the three streams in event time and pushes them
// into the pipeline. Each completed sweep's records (sweep, fit, sigma(0)
// per plateau, verdict) are written through the thread's own read-write
// connection in one short transaction (schema/0003_analysis.sql), then
// published on the event socket (topics "sweep", "fit", "verdict") and handed
// to the alert engine as facts. The store writer is never waited for: the
// analysis only reads what it has committed.
//
// Bounded: at most chunk_readings readings per stream are buffered, at most
// SampleSettings::max_queued_sweeps sweeps wait for their fit (no reading is
// read while they do), and the pipeline bounds its own buffers.
//
// Restart: every start re-reads a sample's readings from the first one (the
// segmentation is cheap and a function of the readings), with the fits
// already stored handed to the pipeline, which reuses them instead of
// fitting again. Records already stored are not written, published or
// alerted again; the alert engine keeps its own open alerts across restarts.
// Readings that fill a gap after the analysis passed it (a late resend with
// a lower seq) are stored but not analysed until the next start.
//
// Event time only: nothing in the analysis reads the clock, so a replay of
// the same readings at any speed writes the same rows.
//
// Thread safety: create/start/stop from one thread; handle_request and
// on_health from one thread (lphid's ingest thread), concurrently with the
// sample threads.
#pragma once

#include <atomic>
#include <chrono>
#include <memory>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "daemon/config/config.hpp"
#include "daemon/live/sample_pipeline.hpp"
#include "daemon/store/database.hpp"

namespace lphi::alerts {
class AlertEngine;
class EventPublisher;
}  // namespace lphi::alerts

namespace lphi::store {
class StoreWriter;
}  // namespace lphi::store

namespace lphi::live {

struct LiveOptions {
  std::string data_dir;                  // for the database and the disk-space check
  // The store's writer: the analysis records are written by its thread, in
  // order with the readings (one writer of the database). Null: each sample
  // writes on its own connection (only where nothing else writes).
  store::StoreWriter* writer = nullptr;
  std::size_t chunk_readings = 4000;     // per query, per stream
  std::chrono::milliseconds poll_interval{100};  // when every stream is caught up
};

// The analysis settings of one configured sample.
SampleSettings sample_settings(const config::SampleConfig& sample);

class LiveAnalysis {
 public:
  // Opens the connections and looks the samples and their sources up (lphid
  // has registered them). engine and events may be null (no alerts, no events).
  static Status create(const config::Config& config, const LiveOptions& options,
                              alerts::AlertEngine* engine, alerts::EventPublisher* events,
                              std::unique_ptr<LiveAnalysis>& out);
  ~LiveAnalysis();
  LiveAnalysis(const LiveAnalysis&) = delete;
  LiveAnalysis& operator=(const LiveAnalysis&) = delete;

  // Starts one thread per sample; stop() ends them (also the destructor).
  void start();
  void stop();

  // The control request types answered by handle_request.
  static std::vector<std::string> request_types();  // samples, sweeps, fits, verdict, progress
  // {"type": one of request_types(), ...}: the reply (daemon/PROTOCOL.md), or
  // a protocol error naming what was wrong with the request.
  nlohmann::json handle_request(const nlohmann::json& request);

  // lphid's once-a-second health: `status` is the control socket's status
  // reply; turns it into a HealthFact for the alert engine.
  void on_health(const nlohmann::json& status);

 private:
  struct Worker;
  LiveAnalysis() = default;
  nlohmann::json samples_reply() const;
  nlohmann::json sweeps_reply(const nlohmann::json& request);
  nlohmann::json fits_reply(const nlohmann::json& request);
  nlohmann::json verdict_reply(const nlohmann::json& request);
  nlohmann::json progress_reply(const nlohmann::json& request);

  config::Config config_;
  LiveOptions options_;
  alerts::AlertEngine* engine_ = nullptr;
  alerts::EventPublisher* events_ = nullptr;
  store::Database control_db_;  // read-only, for handle_request and on_health
  std::vector<std::unique_ptr<Worker>> workers_;
  std::atomic<bool> stopping_{false};
};

}  // namespace lphi::live
