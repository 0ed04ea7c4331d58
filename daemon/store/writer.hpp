// StoreWriter: the only code that writes readings into lphi's database.
//
// One writer thread takes jobs from a bounded queue and writes them with
// group commit: one transaction holds the jobs that are waiting, up to
// commit_max_readings readings or commit_max_ms of work. A job's on_durable
// callback runs only after the COMMIT that holds it has returned, so a sender
// acknowledged from that callback is told the truth. When the queue is full,
// try_submit refuses the job: the caller stops reading new data
// (back-pressure) instead of growing memory.
//
// (source, seq) is unique: a reading that is already stored is counted as a
// duplicate and left alone. A reading whose seq jumps past the highest stored
// one for its source records the missing range in the gaps table.
//
// Checkpoints of the write-ahead log run on a separate thread and connection
// (PASSIVE, so they never block the writer) to keep them out of commits.
//
// One writer: the StoreWriter holds lphid's only write connection. Other parts
// of lphid that store something (the live analysis, the alert engine) submit
// a WriteJob::task, which runs on the writer thread in queue order.
//
// Failure: an exception that escapes a job (a task that throws, an
// on_durable that throws) or the checkpointer is caught, logged and counted;
// the transaction in progress is rolled back and the writer is marked failed
// (WriterStats::failed, last_error). Every job of that transaction and every
// job still queued gets its on_durable with a failed status (internal for the
// transaction, unavailable for the rest), so no sender is acknowledged for
// data that was not written, and try_submit refuses from then on. lphid keeps
// answering (status shows the failure); it does not terminate.
//
// Thread safety: try_submit, stats and stop may be called from any thread; the
// set-up calls (register_*, source_state) only before start().
#pragma once

#include <atomic>
#include <chrono>
#include <condition_variable>
#include <cstdint>
#include <deque>
#include <functional>
#include <map>
#include <memory>
#include <mutex>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include "schema/protocol/reading.hpp"
#include "daemon/store/database.hpp"

namespace lphi::store {

struct WriterOptions {
  std::size_t commit_max_readings = 20000;
  std::chrono::milliseconds commit_max_time{50};
  std::size_t queue_max_readings = 200000;
  Synchronous synchronous = Synchronous::normal;
  std::chrono::milliseconds checkpoint_interval{500};
};

// The outcome of one job, reported after its transaction committed (or failed).
struct WriteResult {
  Status status;                              // !ok: nothing of the job is stored
  std::uint64_t accepted = 0;                 // stored by this job
  std::uint64_t duplicates = 0;               // already stored before
  std::uint64_t gaps_recorded = 0;
  std::optional<std::int64_t> durable_through;  // highest seq of the job now stored
  std::chrono::steady_clock::duration latency{};  // from submit to durable
};

// What an instrument said it is (its answer to *IDN?), at a time.
struct InstrumentIdentity {
  std::string text;
  double seen_at_unix = 0.0;
};

struct WriteJob {
  std::int64_t source_id = 0;
  protocol::Readings readings;  // may be empty (a job that only records an identity)
  std::function<void(const WriteResult&)> on_durable;  // runs on the writer thread
  std::optional<InstrumentIdentity> identity{};  // recorded in instrument_identities
  // A job of another part of lphid that stores something (the live
  // analysis' records, the alert engine's changes): when set,
  // source_id, readings and identity are ignored and the writer thread runs
  // task(db) inside its own transaction, in a SAVEPOINT, in queue order with
  // the readings. A task that fails is rolled back to its savepoint alone
  // (the readings of the same transaction stay) and on_durable gets its
  // status; one that succeeds is durable when on_durable runs. So the
  // database keeps one writer, and a busy store can never starve the
  // analysis of the write lock. A task must return its errors: one that
  // throws fails the writer (see above).
  std::function<Status(Database&)> task{};
};

struct SourceState {
  std::int64_t id = 0;
  protocol::SourceKind kind = protocol::SourceKind::lockin;
  std::optional<std::int64_t> highest_seq;  // highest stored seq
  std::optional<double> last_t;             // t of the reading with highest_seq
};

struct SampleRow {
  std::string name, model;
  double squares = 0, width_m = 0, thickness_m = 0, excitation_a = 0;
  std::string lockin, thermometer, field;
  std::optional<double> gain, diffusion_m2s, mean_free_path_m, alpha_fixed;
};

struct WriterStats {
  std::uint64_t commits = 0;
  std::uint64_t readings_committed = 0;
  std::uint64_t failed_commits = 0;
  std::size_t queued_readings = 0;
  std::size_t queued_jobs = 0;
  // How far the writer lags behind: the age of the oldest job not yet
  // committed (queued, or in the transaction in progress).
  double oldest_queued_age_s = 0.0;
  // Over the most recent commits (up to 65536): wall time of the transaction,
  // from BEGIN to the end of COMMIT.
  double commit_p50_s = 0.0, commit_p99_s = 0.0, commit_p999_s = 0.0, commit_max_s = 0.0;
  std::uint64_t checkpoints = 0;
  // The writer stopped on an exception (see the contract above); last_error
  // is what it said. exceptions counts those caught on either thread.
  bool failed = false;
  std::string last_error;
  std::uint64_t exceptions = 0;
};

class StoreWriter {
 public:
  // Opens (creating if needed) the database and applies the schema migrations.
  static Status open(const std::string& path, const WriterOptions& options,
                     std::unique_ptr<StoreWriter>& out);
  ~StoreWriter();
  StoreWriter(const StoreWriter&) = delete;
  StoreWriter& operator=(const StoreWriter&) = delete;

  // Before start(): makes sure the source exists with this kind. A name that
  // is stored with another kind is refused (its readings would not fit).
  Status register_source(const std::string& name, protocol::SourceKind kind, SourceState& state);
  Status register_sample(const SampleRow& sample);

  void start();
  // False when the queue is full (or the writer stopped or failed); the job is
  // untouched then.
  bool try_submit(WriteJob& job);
  // Writes what is queued, commits, and joins the threads. Idempotent.
  void stop();

  WriterStats stats() const;
  // True once the writer stopped on an exception (see above): it takes no
  // more jobs, ever. Cheap, from any thread.
  bool failed() const;

 private:
  struct Queued {
    WriteJob job;
    std::chrono::steady_clock::time_point submitted;
  };
  struct Source {
    protocol::SourceKind kind;
    std::optional<std::int64_t> highest_seq;
  };
  explicit StoreWriter(const WriterOptions& options);
  void run();
  void run_batches();
  void run_checkpoints();
  void checkpoint_loop();
  void fail(const std::string& where, const std::string& what);
  Status prepare_statements();
  Status write(const WriteJob& job, WriteResult& result);
  bool insert(std::int64_t source_id, const protocol::LockinReading& r);
  bool insert(std::int64_t source_id, const protocol::ThermometerReading& r);
  bool insert(std::int64_t source_id, const protocol::FieldReading& r);
  void record_commit(std::chrono::steady_clock::duration d);

  WriterOptions options_;
  std::string path_;
  Database db_;
  Statement insert_lockin_, insert_thermometer_, insert_field_, insert_gap_, upsert_identity_;
  std::map<std::int64_t, Source> sources_;  // writer thread only, after start()

  mutable std::mutex mutex_;
  std::condition_variable wake_;
  std::deque<Queued> queue_;
  std::vector<Queued> in_flight_;  // the jobs of the open transaction; writer thread only
  std::optional<std::chrono::steady_clock::time_point> oldest_in_transaction_;  // under mutex_
  std::size_t queued_readings_ = 0;
  bool stopping_ = false;
  bool started_ = false;
  bool failed_ = false;
  std::string last_error_;
  std::uint64_t exceptions_ = 0;

  std::condition_variable checkpoint_wake_;
  std::uint64_t checkpoints_ = 0;

  std::uint64_t commits_ = 0, readings_committed_ = 0, failed_commits_ = 0;
  std::vector<double> commit_seconds_;  // ring buffer
  std::size_t commit_next_ = 0;

  std::thread thread_;
  std::thread checkpointer_;
};

}  // namespace lphi::store
