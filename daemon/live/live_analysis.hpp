// LiveAnalysis: lphid's analysis of every configured sample while readings
// arrive.
//
// One SampleWorker (sample_worker.hpp) per [[sample]], each on its own
// thread: it reads the sample's three sources' committed readings through
// its own read-only connection (StreamMerger), runs them through a
// SamplePipeline, stores each completed sweep's records (sweep, fit, sigma(0)
// per plateau, verdict) through the store writer (store/analysis_tables.hpp),
// and then publishes them and hands them to the alert engine
// (RecordPublisher). The control replies that show the results are in
// daemon/control/analysis_queries.hpp.
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
// Failure: a sample whose thread throws stops alone (sample_worker.hpp);
// the others go on.
//
// Thread safety: create/start/stop from one thread; find() and the
// workers' progress() from any thread, concurrently with the sample threads.
#pragma once

#include <atomic>
#include <memory>
#include <string>
#include <vector>

#include "daemon/config/config.hpp"
#include "daemon/live/sample_settings.hpp"
#include "daemon/live/sample_worker.hpp"

namespace lphi::live {

class LiveAnalysis {
 public:
  // Opens the connections and looks the samples and their sources up (lphid
  // has registered them). engine and events may be null (no alerts, no events).
  static Status create(const config::Config& config, const LiveOptions& options, alerts::AlertEngine* engine,
                       alerts::EventPublisher* events, std::unique_ptr<LiveAnalysis>& out);
  ~LiveAnalysis();
  LiveAnalysis(const LiveAnalysis&) = delete;
  LiveAnalysis& operator=(const LiveAnalysis&) = delete;

  // Starts one thread per sample; stop() ends them (also the destructor).
  void start();
  void stop();

  // The worker of the sample named `name`, or null.
  const SampleWorker* find(const std::string& name) const;

 private:
  LiveAnalysis() = default;

  std::vector<std::unique_ptr<SampleWorker>> workers_;
  std::atomic<bool> stopping_{false};
};

}  // namespace lphi::live
