// SampleWorker: one configured sample's analysis on a thread of its own
// inside lphid (LiveAnalysis starts one per [[sample]]).
//
// Each turn of its loop is three named steps: pull (StreamMerger pushes the
// sample's committed readings into its SamplePipeline in event time),
// analyse (the pipeline fits one completed sweep) and store-then-tell (the
// records are written through the store writer, in order with the readings,
// and only once they are durable published by RecordPublisher). With
// nothing to do it sleeps for poll_interval or until stop.
//
// Failure: a write that fails stops this sample's analysis (going on would
// lose the records for good); an exception that escapes a step is caught at
// the thread's entry (health::run_guarded), recorded as the failed part
// "sample:<name>" and stops this sample likewise. Either way progress()
// carries the error, and the other samples and lphid go on.
//
// Fault injection (tests only): the environment variable
// LPHI_FAULT_THROW_AT_SWEEP="<sample>:<index>" makes the worker of <sample>
// throw when its pipeline emits sweep <index>, to test the barrier through a
// real lphid. Unset, it costs one comparison per step.
//
// Thread safety: create/start/stop from one thread; progress() and wake()
// from any thread.
#pragma once

#include <atomic>
#include <condition_variable>
#include <cstdint>
#include <map>
#include <memory>
#include <mutex>
#include <optional>
#include <string>
#include <thread>

#include "daemon/config/config.hpp"
#include "daemon/health/sample_counts.hpp"
#include "daemon/live/record_publisher.hpp"
#include "daemon/live/sample_pipeline.hpp"
#include "daemon/live/stream_merger.hpp"
#include "daemon/store/database.hpp"

namespace lphi::health {
class FailedParts;
}  // namespace lphi::health

namespace lphi::store {
class StoreWriter;
}  // namespace lphi::store

namespace lphi::live {

struct LiveOptions {
  std::string data_dir;                  // for the database
  // The store's writer (required): the analysis records are written by its
  // thread, in order with the readings (one writer of the database).
  store::StoreWriter* writer = nullptr;
  std::size_t chunk_readings = 4000;     // per query, per stream
  std::chrono::milliseconds poll_interval{100};  // when every stream is caught up
  health::FailedParts* failed_parts = nullptr;   // where a thread's exception is recorded
};

// What a sample's analysis has done so far (the "progress" control reply).
struct SampleProgress {
  std::int64_t analysed_seq[3] = {-1, -1, -1};  // by StreamMerger::Stream
  bool busy = true;
  bool started = false;
  int waiting_for = -1;  // the stream the others wait for, -1 none
  std::size_t sweeps = 0, fits = 0, fits_reused = 0;
  std::string error;     // set when the analysis stopped
  health::SampleCounts counts;  // dropped by reason, and why no sweeps
};

class SampleWorker {
 public:
  // Looks the sample and its sources up (lphid has registered them), loads
  // what an earlier run stored and opens the connections.
  static Status create(const config::SampleConfig& sample, const LiveOptions& options,
                       alerts::AlertEngine* engine, alerts::EventPublisher* events,
                       const std::atomic<bool>& stopping, std::unique_ptr<SampleWorker>& out);
  ~SampleWorker();
  SampleWorker(const SampleWorker&) = delete;
  SampleWorker& operator=(const SampleWorker&) = delete;

  void start();
  void wake();  // after `stopping` was set
  void join();

  const std::string& name() const { return config_.name; }
  const std::string& source_name(int stream) const { return source_name_[stream]; }
  std::int64_t source_id(int stream) const { return source_id_[stream]; }
  SampleProgress progress() const;

 private:
  SampleWorker(const config::SampleConfig& sample, const LiveOptions& options, const std::atomic<bool>& stopping);
  Status look_up_ids(const store::Database& db);
  void run();
  void loop();
  bool analyse_one(PipelineOutput& out);
  Status store_records(const PipelineOutput& out);
  void inject_fault(const PipelineOutput& out) const;
  void stop_with(const std::string& error);
  void set_progress(bool busy);
  void sleep_until_more();

  config::SampleConfig config_;
  LiveOptions options_;
  const std::atomic<bool>& stopping_;
  std::int64_t sample_id_ = 0;
  std::int64_t source_id_[3] = {0, 0, 0};
  std::string source_name_[3];
  std::optional<std::int64_t> fault_at_sweep_;

  StreamMerger merger_;
  std::unique_ptr<SamplePipeline> pipeline_;
  std::unique_ptr<RecordPublisher> publisher_;
  std::map<std::int64_t, std::int64_t> sweep_ids_;  // sweep index -> sweeps.id

  health::DropLog drop_log_;   // the worker thread's own
  mutable std::mutex mutex_;  // guards progress_, wake_
  std::condition_variable wake_;
  SampleProgress progress_;
  std::thread thread_;
};

}  // namespace lphi::live
