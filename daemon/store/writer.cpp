// The store writer (writer.hpp): one algorithm, the group-commit loop that
// takes queued jobs, writes them in one transaction, commits, then tells each
// job it is durable; with the checkpointer beside it.
#include "daemon/store/writer.hpp"

#include <spdlog/spdlog.h>
#include <sqlite3.h>

#include <algorithm>
#include <chrono>
#include <exception>

#include "daemon/store/migrations.hpp"

namespace lphi::store {

using protocol::SourceKind;
using Clock = std::chrono::steady_clock;

namespace {

constexpr std::size_t commit_history = 65536;

std::string_view readings_table(SourceKind kind) {
  switch (kind) {
    case SourceKind::lockin: return "lockin_readings";
    case SourceKind::thermometer: return "thermometer_readings";
    case SourceKind::field: return "field_readings";
  }
  return "lockin_readings";
}

double unix_now() {
  return std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
}

}  // namespace

StoreWriter::StoreWriter(const WriterOptions& options) : options_(options) {}

StoreWriter::~StoreWriter() { stop(); }

Status StoreWriter::open(const std::string& path, const WriterOptions& options,
                         std::unique_ptr<StoreWriter>& out) {
  std::unique_ptr<StoreWriter> w(new StoreWriter(options));
  w->path_ = path;
  if (auto s = Database::open_writer(path, w->db_, options.synchronous); !s) return s;
  if (auto s = apply_migrations(w->db_, embedded_migrations()); !s) return s;
  if (auto s = w->prepare_statements(); !s) return s;
  out = std::move(w);
  return Status::success();
}

Status StoreWriter::prepare_statements() {
  if (auto s = Statement::prepare(
          db_,
          "INSERT INTO instrument_identities (source_id, identity, first_seen, last_seen)"
          " VALUES (?1, ?2, ?3, ?3) ON CONFLICT (source_id, identity) DO UPDATE SET"
          " last_seen = max(last_seen, excluded.last_seen)",
          upsert_identity_);
      !s) {
    return s;
  }
  if (auto s = Statement::prepare(
          db_,
          "INSERT INTO lockin_readings (source_id, seq, t, x_v, y_v, frequency_hz, range_v,"
          " time_constant_s, overload) VALUES (?,?,?,?,?,?,?,?,?) ON CONFLICT DO NOTHING",
          insert_lockin_);
      !s) {
    return s;
  }
  if (auto s = Statement::prepare(db_,
                                  "INSERT INTO thermometer_readings (source_id, seq, t,"
                                  " temperature_k, resistance_ohm) VALUES (?,?,?,?,?)"
                                  " ON CONFLICT DO NOTHING",
                                  insert_thermometer_);
      !s) {
    return s;
  }
  if (auto s = Statement::prepare(db_,
                                  "INSERT INTO field_readings (source_id, seq, t, field_t)"
                                  " VALUES (?,?,?,?) ON CONFLICT DO NOTHING",
                                  insert_field_);
      !s) {
    return s;
  }
  return Statement::prepare(
      db_, "INSERT INTO gaps (source_id, first_seq, last_seq, detected_at) VALUES (?,?,?,?)",
      insert_gap_);
}

Status StoreWriter::register_source(const std::string& name, SourceKind kind, SourceState& state) {
  Statement find;
  if (auto s = Statement::prepare(db_, "SELECT id, kind FROM sources WHERE name = ?", find); !s) {
    return s;
  }
  find.bind(1, std::string_view(name));
  int rc = find.step();
  if (rc == SQLITE_ROW) {
    state.id = find.column_int(0);
    const std::string stored = find.column_text(1);
    if (stored != protocol::kind_name(kind)) {
      return Status::conflict("source \"" + name + "\" is stored as a " + stored +
                             " but configured as a " + std::string(protocol::kind_name(kind)) +
                             "; give the new instrument a new name");
    }
  } else if (rc == SQLITE_DONE) {
    Statement add;
    if (auto s = Statement::prepare(db_, "INSERT INTO sources (name, kind) VALUES (?, ?)", add); !s) {
      return s;
    }
    add.bind(1, std::string_view(name));
    add.bind(2, protocol::kind_name(kind));
    if (add.step() != SQLITE_DONE) return db_.error("adding source " + name);
    state.id = static_cast<std::int64_t>(sqlite3_last_insert_rowid(db_.handle()));
  } else {
    return db_.error("looking up source " + name);
  }
  state.kind = kind;
  state.highest_seq.reset();
  state.last_t.reset();
  Statement last;
  const std::string sql = "SELECT seq, t FROM " + std::string(readings_table(kind)) +
                          " WHERE source_id = ? ORDER BY seq DESC LIMIT 1";
  if (auto s = Statement::prepare(db_, sql, last); !s) return s;
  last.bind(1, state.id);
  rc = last.step();
  if (rc == SQLITE_ROW) {
    state.highest_seq = last.column_int(0);
    state.last_t = last.column_double(1);
  } else if (rc != SQLITE_DONE) {
    return db_.error("reading the last reading of " + name);
  }
  sources_[state.id] = Source{kind, state.highest_seq};
  return Status::success();
}

Status StoreWriter::register_sample(const SampleRow& r) {
  Statement up;
  if (auto s = Statement::prepare(
          db_,
          "INSERT INTO samples (name, model, squares, width_m, thickness_m, excitation_a,"
          " lockin_source, thermometer_source, field_source, gain, diffusion_m2s,"
          " mean_free_path_m, alpha_fixed) VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?)"
          " ON CONFLICT (name) DO UPDATE SET model=excluded.model, squares=excluded.squares,"
          " width_m=excluded.width_m, thickness_m=excluded.thickness_m,"
          " excitation_a=excluded.excitation_a, lockin_source=excluded.lockin_source,"
          " thermometer_source=excluded.thermometer_source, field_source=excluded.field_source,"
          " gain=excluded.gain, diffusion_m2s=excluded.diffusion_m2s,"
          " mean_free_path_m=excluded.mean_free_path_m, alpha_fixed=excluded.alpha_fixed",
          up);
      !s) {
    return s;
  }
  up.bind(1, std::string_view(r.name));
  up.bind(2, std::string_view(r.model));
  up.bind(3, r.squares);
  up.bind(4, r.width_m);
  up.bind(5, r.thickness_m);
  up.bind(6, r.excitation_a);
  up.bind(7, std::string_view(r.lockin));
  up.bind(8, std::string_view(r.thermometer));
  up.bind(9, std::string_view(r.field));
  up.bind_optional(10, r.gain);
  up.bind_optional(11, r.diffusion_m2s);
  up.bind_optional(12, r.mean_free_path_m);
  up.bind_optional(13, r.alpha_fixed);
  if (up.step() != SQLITE_DONE) return db_.error("storing sample " + r.name);
  return Status::success();
}

void StoreWriter::start() {
  std::lock_guard lock(mutex_);
  if (started_) return;
  started_ = true;
  thread_ = std::thread([this] { run(); });
  checkpointer_ = std::thread([this] { run_checkpoints(); });
}

bool StoreWriter::try_submit(WriteJob& job) {
  const std::size_t n = protocol::reading_count(job.readings);
  {
    std::lock_guard lock(mutex_);
    if (stopping_ || !started_ || failed_) return false;
    // One job larger than the whole queue still goes in when the queue is
    // empty, so that nothing can be refused forever.
    if (!queue_.empty() && queued_readings_ + n > options_.queue_max_readings) return false;
    queue_.push_back(Queued{std::move(job), Clock::now()});
    queued_readings_ += n;
  }
  wake_.notify_one();
  return true;
}

void StoreWriter::stop() {
  {
    std::lock_guard lock(mutex_);
    stopping_ = true;
  }
  wake_.notify_all();
  checkpoint_wake_.notify_all();
  if (thread_.joinable()) thread_.join();
  if (checkpointer_.joinable()) checkpointer_.join();
}

bool StoreWriter::insert(std::int64_t source_id, const protocol::LockinReading& r) {
  auto& s = insert_lockin_;
  s.bind(1, source_id);
  s.bind(2, r.seq);
  s.bind(3, r.t);
  s.bind(4, r.x_v);
  s.bind(5, r.y_v);
  s.bind_optional(6, r.frequency_hz);
  s.bind_optional(7, r.range_v);
  s.bind_optional(8, r.time_constant_s);
  if (r.overload) {
    s.bind(9, std::int64_t{*r.overload ? 1 : 0});
  } else {
    s.bind_null(9);
  }
  const bool ok = s.step() == SQLITE_DONE;
  s.reset();
  return ok;
}

bool StoreWriter::insert(std::int64_t source_id, const protocol::ThermometerReading& r) {
  auto& s = insert_thermometer_;
  s.bind(1, source_id);
  s.bind(2, r.seq);
  s.bind(3, r.t);
  s.bind(4, r.temperature_k);
  s.bind_optional(5, r.resistance_ohm);
  const bool ok = s.step() == SQLITE_DONE;
  s.reset();
  return ok;
}

bool StoreWriter::insert(std::int64_t source_id, const protocol::FieldReading& r) {
  auto& s = insert_field_;
  s.bind(1, source_id);
  s.bind(2, r.seq);
  s.bind(3, r.t);
  s.bind(4, r.field_t);
  const bool ok = s.step() == SQLITE_DONE;
  s.reset();
  return ok;
}

Status StoreWriter::write(const WriteJob& job, WriteResult& result) {
  if (job.task) {
    if (auto s = db_.exec("SAVEPOINT lphi_task"); !s) return s;
    Status task_status = job.task(db_);
    if (!task_status) {
      result.status = std::move(task_status);
      if (auto s = db_.exec("ROLLBACK TO lphi_task"); !s) return s;
    }
    return db_.exec("RELEASE lphi_task");
  }
  auto found = sources_.find(job.source_id);
  if (found == sources_.end()) {
    return Status::internal("source id " + std::to_string(job.source_id) + " is not registered");
  }
  Source& source = found->second;
  if (protocol::kind_of(job.readings) != source.kind) {
    return Status::internal("readings of the wrong kind for source id " +
                           std::to_string(job.source_id));
  }
  if (job.identity) {
    upsert_identity_.bind(1, job.source_id);
    upsert_identity_.bind(2, std::string_view(job.identity->text));
    upsert_identity_.bind(3, job.identity->seen_at_unix);
    const bool ok = upsert_identity_.step() == SQLITE_DONE;
    upsert_identity_.reset();
    if (!ok) return db_.error("storing an instrument identity");
  }
  return std::visit(
      [&](const auto& readings) -> Status {
        for (const auto& r : readings) {
          if (!insert(job.source_id, r)) return db_.error("storing a reading");
          if (sqlite3_changes(db_.handle()) == 0) {
            ++result.duplicates;
          } else {
            ++result.accepted;
          }
          if (source.highest_seq && r.seq > *source.highest_seq + 1) {
            insert_gap_.bind(1, job.source_id);
            insert_gap_.bind(2, *source.highest_seq + 1);
            insert_gap_.bind(3, r.seq - 1);
            insert_gap_.bind(4, unix_now());
            const bool ok = insert_gap_.step() == SQLITE_DONE;
            insert_gap_.reset();
            if (!ok) return db_.error("recording a gap");
            ++result.gaps_recorded;
          }
          if (!source.highest_seq || r.seq > *source.highest_seq) source.highest_seq = r.seq;
          if (!result.durable_through || r.seq > *result.durable_through) {
            result.durable_through = r.seq;
          }
        }
        return Status::success();
      },
      job.readings);
}

void StoreWriter::record_commit(Clock::duration d) {
  const double seconds = std::chrono::duration<double>(d).count();
  if (commit_seconds_.size() < commit_history) {
    commit_seconds_.push_back(seconds);
  } else {
    commit_seconds_[commit_next_] = seconds;
    commit_next_ = (commit_next_ + 1) % commit_history;
  }
}

// The writer thread's entry point: nothing escapes it (see the contract in
// writer.hpp). A job that throws leaves its transaction open; it is rolled
// back here, and every job taken or still queued is told it was not written.
void StoreWriter::run() {
  std::string what;
  try {
    run_batches();
    return;
  } catch (const std::exception& e) {
    what = e.what();
  } catch (...) {
    what = "an exception that is not a std::exception";
  }
  fail("the store writer thread", what);
  (void)db_.exec("ROLLBACK");
  // The sources' highest seq may count readings of the rolled-back
  // transaction; nothing is written any more, so it is not used again.
  const Status in_batch = Status::internal("the store writer failed: " + what);
  const Status queued = Status::unavailable("the store writer failed and writes nothing more: " + what);
  // in_flight_ holds the jobs of the transaction; those already told their
  // outcome have no on_durable left.
  std::vector<Queued> taken = std::move(in_flight_);
  in_flight_.clear();
  const std::size_t in_transaction = taken.size();
  {
    std::lock_guard lock(mutex_);
    for (auto& q : queue_) taken.push_back(std::move(q));
    queue_.clear();
    queued_readings_ = 0;
  }
  for (std::size_t i = 0; i < taken.size(); ++i) {
    auto on_durable = std::move(taken[i].job.on_durable);
    if (!on_durable) continue;
    WriteResult r{i < in_transaction ? in_batch : queued, 0, 0, 0, std::nullopt, {}};
    r.latency = Clock::now() - taken[i].submitted;
    try {
      on_durable(r);
    } catch (const std::exception& e) {
      spdlog::error("store writer: a job's completion threw while failing it: {}", e.what());
    } catch (...) {
      spdlog::error("store writer: a job's completion threw while failing it");
    }
  }
}

void StoreWriter::fail(const std::string& where, const std::string& what) {
  spdlog::critical("{} stopped on an exception: {}; the store writes nothing more "
                   "(queued jobs are told so, senders are not acknowledged)",
                   where, what);
  std::lock_guard lock(mutex_);
  failed_ = true;
  ++exceptions_;
  last_error_ = where + ": " + what;
}

void StoreWriter::run_batches() {
  std::vector<Queued>& batch = in_flight_;
  std::vector<WriteResult> results;
  while (true) {
    batch.clear();
    {
      std::unique_lock lock(mutex_);
      wake_.wait(lock, [&] { return stopping_ || !queue_.empty(); });
      if (queue_.empty()) return;  // stopping, and everything is written
    }
    const auto began = Clock::now();
    std::map<std::int64_t, Source> before = sources_;
    Status status = db_.exec("BEGIN");
    std::size_t readings = 0;
    results.clear();
    // Group commit: take what is waiting, up to the limits.
    while (status && readings < options_.commit_max_readings &&
           Clock::now() - began < options_.commit_max_time) {
      Queued next;
      {
        std::lock_guard lock(mutex_);
        if (queue_.empty()) break;
        next = std::move(queue_.front());
        queue_.pop_front();
        if (batch.empty()) oldest_in_transaction_ = next.submitted;
      }
      readings += protocol::reading_count(next.job.readings);
      batch.push_back(std::move(next));  // first: a job that throws is in the batch run() fails
      WriteResult result;
      status = write(batch.back().job, result);
      results.push_back(std::move(result));
    }
    if (status) status = db_.exec("COMMIT");
    const auto done = Clock::now();
    if (!status) {
      (void)db_.exec("ROLLBACK");
      sources_ = std::move(before);
    }
    {
      std::lock_guard lock(mutex_);
      queued_readings_ -= readings;
      oldest_in_transaction_.reset();
      if (status) {
        ++commits_;
        readings_committed_ += readings;
        record_commit(done - began);
      } else {
        ++failed_commits_;
      }
    }
    for (std::size_t i = 0; i < batch.size(); ++i) {
      WriteResult& result = results[i];
      if (!status) result = WriteResult{status, 0, 0, 0, std::nullopt, {}};
      result.latency = done - batch[i].submitted;
      // Taken out first: one that throws is not told again by run().
      auto on_durable = std::move(batch[i].job.on_durable);
      batch[i].job.on_durable = nullptr;
      if (on_durable) on_durable(result);
    }
    if (!status) {
      // A failing disk should not spin the CPU; the senders will resend.
      std::this_thread::sleep_for(std::chrono::milliseconds(50));
    }
  }
}

// The checkpointer's entry point: an exception is caught, logged and counted,
// and marks the writer failed (the log would grow without checkpoints).
void StoreWriter::run_checkpoints() {
  try {
    checkpoint_loop();
  } catch (const std::exception& e) {
    fail("the store checkpointer", e.what());
  } catch (...) {
    fail("the store checkpointer", "an exception that is not a std::exception");
  }
}

void StoreWriter::checkpoint_loop() {
  Database db;
  if (auto s = Database::open_writer(path_, db, options_.synchronous); !s) {
    spdlog::error("store checkpointer: {}; the write-ahead log is not checkpointed", s.message());
    return;
  }
  std::unique_lock lock(mutex_);
  while (!stopping_) {
    checkpoint_wake_.wait_for(lock, options_.checkpoint_interval, [&] { return stopping_; });
    lock.unlock();
    // PASSIVE never waits for the writer or for readers: it copies what it can.
    int log_frames = 0, checkpointed = 0;
    const int rc = sqlite3_wal_checkpoint_v2(db.handle(), nullptr, SQLITE_CHECKPOINT_PASSIVE,
                                             &log_frames, &checkpointed);
    lock.lock();
    if (rc == SQLITE_OK) ++checkpoints_;
  }
}

bool StoreWriter::failed() const {
  std::lock_guard lock(mutex_);
  return failed_;
}

WriterStats StoreWriter::stats() const {
  std::lock_guard lock(mutex_);
  WriterStats s;
  s.commits = commits_;
  s.readings_committed = readings_committed_;
  s.failed_commits = failed_commits_;
  s.queued_readings = queued_readings_;
  s.queued_jobs = queue_.size();
  s.checkpoints = checkpoints_;
  s.failed = failed_;
  s.last_error = last_error_;
  s.exceptions = exceptions_;
  // A job in the open transaction is still behind: a writer held in a
  // transaction (a slow disk, a lock held elsewhere) shows its lag.
  std::optional<Clock::time_point> oldest = oldest_in_transaction_;
  if (!queue_.empty() && (!oldest || queue_.front().submitted < *oldest)) oldest = queue_.front().submitted;
  if (oldest) s.oldest_queued_age_s = std::chrono::duration<double>(Clock::now() - *oldest).count();
  if (!commit_seconds_.empty()) {
    std::vector<double> sorted = commit_seconds_;
    std::sort(sorted.begin(), sorted.end());
    auto at = [&](double q) {
      const auto i = static_cast<std::size_t>(q * static_cast<double>(sorted.size() - 1) + 0.5);
      return sorted[std::min(i, sorted.size() - 1)];
    };
    s.commit_p50_s = at(0.5);
    s.commit_p99_s = at(0.99);
    s.commit_p999_s = at(0.999);
    s.commit_max_s = sorted.back();
  }
  return s;
}

}  // namespace lphi::store
