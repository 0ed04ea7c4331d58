#include "daemon/live/sample_worker.hpp"

#include <chrono>
#include <algorithm>
#include <cstdlib>
#include <future>
#include <spdlog/spdlog.h>
#include <stdexcept>

#include "daemon/health/failed_parts.hpp"
#include "daemon/live/sample_settings.hpp"
#include "daemon/store/analysis_tables.hpp"
#include "daemon/store/writer.hpp"

namespace lphi::live {

namespace {

constexpr std::string_view writer_stopping = "the store writer is stopping";
constexpr const char* fault_variable = "LPHI_FAULT_THROW_AT_SWEEP";

// LPHI_FAULT_THROW_AT_SWEEP="<sample>:<index>" for this sample, if set.
std::optional<std::int64_t> fault_at_sweep(const std::string& sample) {
  const char* value = std::getenv(fault_variable);
  if (value == nullptr) return std::nullopt;
  const std::string text = value;
  const auto colon = text.rfind(':');
  if (colon == std::string::npos || text.substr(0, colon) != sample) return std::nullopt;
  try {
    return std::stoll(text.substr(colon + 1));
  } catch (const std::exception&) {
    spdlog::warn("{}={} is not <sample>:<sweep index>; ignored", fault_variable, text);
    return std::nullopt;
  }
}

}  // namespace

SampleWorker::SampleWorker(const config::SampleConfig& sample, const LiveOptions& options,
                           const std::atomic<bool>& stopping)
    : config_(sample), options_(options), stopping_(stopping) {}

SampleWorker::~SampleWorker() { join(); }

Status SampleWorker::create(const config::SampleConfig& sample, const LiveOptions& options,
                            alerts::AlertEngine* engine, alerts::EventPublisher* events,
                            const std::atomic<bool>& stopping, std::unique_ptr<SampleWorker>& out) {
  std::unique_ptr<SampleWorker> w(new SampleWorker(sample, options, stopping));
  const SampleSettings settings = sample_settings(sample);
  if (auto e = validate(settings); !e.empty()) return Status::invalid_input("sample " + sample.name + ": " + e);
  const std::string path = store::database_path(options.data_dir);
  store::Database db;
  if (auto s = store::Database::open(path, store::OpenMode::read_only, db); !s) return s;
  if (auto s = w->look_up_ids(db); !s) return s;
  store::StoredAnalysis stored;
  if (auto s = store::load_stored_analysis(db, w->sample_id_, sample.name, stored); !s) return s;
  if (!stored.fits.empty() || stored.last_sweep_index >= 0) {
    spdlog::info("sample {}: {} sweeps and {} fits stored; re-reading the readings, reusing the fits",
                 sample.name, stored.sweep_ids.size(), stored.fits.size());
  }
  const double lag_allowance_s = settings.aligner.max_hold_s - std::max(settings.aligner.max_age_temperature_s,
                                                                        align::max_age_field_bound_s(settings.aligner));
  if (auto s = w->merger_.open(path, w->source_id_, w->source_name_, sample.name, options.chunk_readings,
                               lag_allowance_s);
      !s) {
    return s;
  }
  w->sweep_ids_ = std::move(stored.sweep_ids);
  w->publisher_ = std::make_unique<RecordPublisher>(sample.name, stored.last_sweep_index, engine, events);
  w->pipeline_ = std::make_unique<SamplePipeline>(settings, std::move(stored.fits));
  w->fault_at_sweep_ = fault_at_sweep(sample.name);
  if (w->fault_at_sweep_) {
    spdlog::warn("sample {}: fault injection: its analysis throws at sweep {} ({})", sample.name,
                 *w->fault_at_sweep_, fault_variable);
  }
  out = std::move(w);
  return Status::success();
}

Status SampleWorker::look_up_ids(const store::Database& db) {
  if (auto s = store::find_sample_id(db, config_.name, sample_id_); !s) return Status::internal(s.message());
  const std::string names[3] = {config_.lockin, config_.thermometer, config_.field};
  for (int k = 0; k < 3; ++k) {
    if (auto s = store::find_source_id(db, names[k], source_id_[k]); !s) {
      return Status::internal("sample " + config_.name + ": " + s.message());
    }
    source_name_[k] = names[k];
  }
  return Status::success();
}

void SampleWorker::start() {
  if (thread_.joinable()) return;
  {
    std::lock_guard lock(mutex_);
    progress_.started = true;
  }
  thread_ = std::thread([this] { run(); });
}

void SampleWorker::wake() {
  {
    std::lock_guard lock(mutex_);
  }
  wake_.notify_all();
}

void SampleWorker::join() {
  if (thread_.joinable()) thread_.join();
}

SampleProgress SampleWorker::progress() const {
  std::lock_guard lock(mutex_);
  return progress_;
}

// The thread's entry: the exception barrier around the loop.
void SampleWorker::run() {
  std::string error;
  const bool ok = health::run_guarded(options_.failed_parts, "sample:" + config_.name, [this, &error] {
    try {
      loop();
    } catch (const std::exception& e) {
      error = e.what();
      throw;
    }
  });
  if (!ok) stop_with(error.empty() ? "its analysis failed" : error);
}

void SampleWorker::loop() {
  PipelineOutput out;
  while (!stopping_.load()) {
    const bool pushed = merger_.push_merged(*pipeline_, stopping_);
    const bool work = pipeline_->has_work();
    if (work && !analyse_one(out)) return;
    set_progress(pipeline_->has_work());
    if (!pushed && !work) sleep_until_more();
  }
}

// Fits one completed sweep, stores its records and tells about them. False:
// the analysis stops (lphid is stopping, or the records could not be stored).
bool SampleWorker::analyse_one(PipelineOutput& out) {
  out.clear();
  pipeline_->process(out, 1);
  inject_fault(out);
  if (auto s = store_records(out); !s) {
    if (s.code() == StatusCode::unavailable) {
      // lphid is shutting down (the writer stops before the analysis):
      // these records are not stored, and the next start refits them.
      spdlog::info("sample {}: {}; the last records are left for the next start", config_.name, s.message());
      return false;
    }
    // Going on would lose these records for good (the next start would
    // find the sweep without its fit): stop this sample's analysis, say so.
    spdlog::error("sample {}: {}; its analysis stops until lphid restarts", config_.name, s.message());
    stop_with(s.message());
    return false;
  }
  publisher_->publish(out, sweep_ids_);
  return true;
}

void SampleWorker::inject_fault(const PipelineOutput& out) const {
  if (!fault_at_sweep_) return;
  for (const auto& s : out.sweeps) {
    if (s.index == *fault_at_sweep_) {
      throw std::runtime_error("fault injection (" + std::string(fault_variable) + "): sweep " +
                               std::to_string(s.index));
    }
  }
}

void SampleWorker::stop_with(const std::string& error) {
  {
    std::lock_guard lock(mutex_);
    progress_.error = error;
  }
  set_progress(true);
}

// Through the store's writer thread, in order with the readings, and wait
// until it is durable: the records must be stored before they are published.
// The writer takes a task whenever it runs (tasks hold no readings); it
// refuses only when it is stopping.
Status SampleWorker::store_records(const PipelineOutput& out) {
  if (out.sweeps.empty() && out.fits.empty() && out.verdicts.empty()) return Status::success();
  std::promise<Status> done;
  auto durable = done.get_future();
  store::WriteJob job;
  job.task = [this, &out](store::Database& db) { return store::write_analysis_records(db, sample_id_, out, sweep_ids_); };
  job.on_durable = [&done](const store::WriteResult& r) { done.set_value(r.status); };
  if (!options_.writer->try_submit(job)) return Status::unavailable(std::string(writer_stopping));
  return durable.get();
}

void SampleWorker::set_progress(bool busy) {
  health::SampleCounts counts;
  counts.sample = config_.name;
  counts.alignment = pipeline_->aligner().counts();
  counts.field = pipeline_->aligner().field_stats();
  counts.segmentation = pipeline_->segmenter().counts();
  counts.diagnostics = pipeline_->segmenter().diagnostics();
  counts.field_age_set = config_.max_age_field_s.has_value();
  counts.span_set = config_.sweep_min_span_t.has_value();
  counts.tolerance_set = config_.reversal_tolerance_t.has_value();
  // Wall time: the log is for the operator, not part of the analysis.
  const double now_s = std::chrono::duration<double>(std::chrono::steady_clock::now().time_since_epoch()).count();
  for (const auto& line : drop_log_.update(counts, now_s)) spdlog::info("{}", line);
  std::lock_guard lock(mutex_);
  progress_.counts = std::move(counts);
  for (int k = 0; k < 3; ++k) progress_.analysed_seq[k] = merger_.cursor(k);
  progress_.busy = busy;
  progress_.waiting_for = merger_.waiting_for();
  progress_.sweeps = pipeline_->sweeps_seen();
  progress_.fits = pipeline_->fits_done();
  progress_.fits_reused = pipeline_->fits_reused();
}

void SampleWorker::sleep_until_more() {
  {
    std::unique_lock lock(mutex_);
    wake_.wait_for(lock, options_.poll_interval, [&] { return stopping_.load(); });
  }
  merger_.rewind_caught_up();
}

}  // namespace lphi::live
