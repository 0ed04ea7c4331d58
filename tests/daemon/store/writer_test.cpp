// StoreWriter's promises, checked from outside the writer: through separate
// read-only SQLite connections (StoreReader) and SQLite's integrity_check.
#include <gtest/gtest.h>
#include <sqlite3.h>

#include <atomic>
#include <chrono>
#include <condition_variable>
#include <mutex>
#include <thread>

#include "daemon/store/reader.hpp"
#include "daemon/store/writer.hpp"
#include "daemon/store/test_access.hpp"
#include "tests/support/temp_dir.hpp"

namespace lphi::store {
namespace {

using protocol::FieldReading;
using protocol::LockinReading;
using protocol::SourceKind;
using protocol::ThermometerReading;

std::vector<LockinReading> lockin_run(std::int64_t first_seq, std::int64_t count) {
  std::vector<LockinReading> v;
  for (std::int64_t s = first_seq; s < first_seq + count; ++s) {
    LockinReading r;
    r.seq = s;
    r.t = 1.7e9 + 0.05 * static_cast<double>(s);
    r.x_v = 1.0e-6 * (1.0 + 1.0 / static_cast<double>(s + 3));  // values that do not round nicely
    r.y_v = -2.5e-9 / static_cast<double>(s + 7);
    if (s % 2 == 0) r.frequency_hz = 13.7;
    if (s % 3 == 0) r.overload = (s % 2 == 0);
    v.push_back(r);
  }
  return v;
}

// Collects results from the writer thread.
struct Results {
  std::mutex mutex;
  std::condition_variable cv;
  std::vector<WriteResult> done;
  std::function<void(const WriteResult&)> callback() {
    return [this](const WriteResult& r) {
      std::lock_guard lock(mutex);
      done.push_back(r);
      cv.notify_all();
    };
  }
  bool wait_for(std::size_t n) {
    std::unique_lock lock(mutex);
    return cv.wait_for(lock, std::chrono::seconds(30), [&] { return done.size() >= n; });
  }
};

struct Fixture {
  lphi::testing::TempDir dir;
  std::unique_ptr<StoreWriter> writer;
  SourceState lockin, thermo;
  explicit Fixture(WriterOptions options = {}) {
    EXPECT_TRUE(StoreWriter::open(dir.file("lphi.db"), options, writer).ok());
    EXPECT_TRUE(writer->register_source("lockin-a", SourceKind::lockin, lockin).ok());
    EXPECT_TRUE(writer->register_source("mxc", SourceKind::thermometer, thermo).ok());
    writer->start();
  }
  std::vector<LockinReading> stored_lockin() {
    StoreReader reader;
    EXPECT_TRUE(StoreReader::open(dir.file("lphi.db"), reader).ok());
    std::vector<LockinReading> out;
    SourceRow row{lockin.id, "lockin-a", SourceKind::lockin};
    EXPECT_TRUE(reader
                    .readings(row, all_time_from, all_time_to,
                              [&](const protocol::Readings& chunk) {
                                const auto& v = std::get<std::vector<LockinReading>>(chunk);
                                out.insert(out.end(), v.begin(), v.end());
                                return true;
                              })
                    .ok());
    return out;
  }
};

TEST(StoreWriter, AcknowledgesOnlyWhatAnotherConnectionCanAlreadyRead) {
  Fixture f;
  StoreReader reader;
  ASSERT_TRUE(StoreReader::open(f.dir.file("lphi.db"), reader).ok());
  const SourceRow row{f.lockin.id, "lockin-a", SourceKind::lockin};
  std::atomic<int> checked{0}, visible{0};
  Results results;
  for (int b = 0; b < 20; ++b) {
    WriteJob job;
    job.source_id = f.lockin.id;
    job.readings = lockin_run(1 + 100 * b, 100);
    job.on_durable = [&, b](const WriteResult& r) {
      // At the moment of the ack, an independent read-only connection must
      // already see every reading of the batch: the COMMIT has happened.
      std::int64_t count = 0;
      Statement s;
      EXPECT_TRUE(Statement::prepare(reader.database(),
                                     "SELECT count(*) FROM lockin_readings WHERE source_id = ? AND seq BETWEEN ? AND ?",
                                     s)
                      .ok());
      s.bind(1, row.id);
      s.bind(2, std::int64_t{1 + 100 * b});
      s.bind(3, std::int64_t{100 + 100 * b});
      if (s.step() == SQLITE_ROW) count = s.column_int(0);
      ++checked;
      if (count == 100) ++visible;
      results.callback()(r);
    };
    WriteJob copy = std::move(job);
    while (!f.writer->try_submit(copy)) std::this_thread::sleep_for(std::chrono::milliseconds(1));
  }
  ASSERT_TRUE(results.wait_for(20));
  EXPECT_EQ(checked.load(), 20);
  EXPECT_EQ(visible.load(), 20);
  for (const auto& r : results.done) {
    EXPECT_TRUE(r.status.ok()) << r.status.message();
    EXPECT_EQ(r.accepted, 100u);
    EXPECT_EQ(r.duplicates, 0u);
  }
}

TEST(StoreWriter, StoresEveryValueExactly) {
  Fixture f;
  Results results;
  const auto sent = lockin_run(1, 5000);
  WriteJob job{f.lockin.id, sent, results.callback()};
  ASSERT_TRUE(f.writer->try_submit(job));
  ASSERT_TRUE(results.wait_for(1));
  EXPECT_EQ(results.done[0].durable_through, 5000);
  // SQLite REAL is an IEEE-754 double: what goes in comes out bit for bit.
  EXPECT_EQ(f.stored_lockin(), sent);
}

TEST(StoreWriter, DuplicatesAreCountedAndIgnored) {
  Fixture f;
  Results results;
  WriteJob first{f.lockin.id, lockin_run(1, 50), results.callback()};
  ASSERT_TRUE(f.writer->try_submit(first));
  ASSERT_TRUE(results.wait_for(1));
  // The same seqs again, with different values: the first copy stays.
  auto changed = lockin_run(26, 50);
  for (auto& r : changed) r.x_v = 42.0;
  WriteJob second{f.lockin.id, changed, results.callback()};
  ASSERT_TRUE(f.writer->try_submit(second));
  ASSERT_TRUE(results.wait_for(2));
  EXPECT_EQ(results.done[1].accepted, 25u);    // seqs 51..75 are new
  EXPECT_EQ(results.done[1].duplicates, 25u);  // seqs 26..50 were stored
  const auto stored = f.stored_lockin();
  ASSERT_EQ(stored.size(), 75u);
  EXPECT_EQ(stored[30].x_v, lockin_run(31, 1)[0].x_v);
  EXPECT_EQ(stored[60].x_v, 42.0);
}

TEST(StoreWriter, GapsAreRecorded) {
  Fixture f;
  Results results;
  WriteJob a{f.lockin.id, lockin_run(1, 10), results.callback()};
  ASSERT_TRUE(f.writer->try_submit(a));
  WriteJob b{f.lockin.id, lockin_run(20, 6), results.callback()};
  ASSERT_TRUE(f.writer->try_submit(b));
  ASSERT_TRUE(results.wait_for(2));
  StoreReader reader;
  ASSERT_TRUE(StoreReader::open(f.dir.file("lphi.db"), reader).ok());
  std::vector<GapRow> gaps;
  ASSERT_TRUE(reader.gaps({f.lockin.id, "lockin-a", SourceKind::lockin}, gaps).ok());
  ASSERT_EQ(gaps.size(), 1u);
  EXPECT_EQ(gaps[0].first_seq, 11);
  EXPECT_EQ(gaps[0].last_seq, 19);
  // Filling the gap later stores the readings and records no new gap.
  WriteJob fill{f.lockin.id, lockin_run(11, 9), results.callback()};
  ASSERT_TRUE(f.writer->try_submit(fill));
  ASSERT_TRUE(results.wait_for(3));
  EXPECT_EQ(results.done[2].accepted, 9u);
  EXPECT_EQ(results.done[2].gaps_recorded, 0u);
  EXPECT_EQ(f.stored_lockin().size(), 25u);
}

// Holds SQLite's write lock from another connection so the writer stalls.
struct WriteLockHolder {
  Database db;
  explicit WriteLockHolder(const std::string& path) {
    EXPECT_TRUE(open_writer_connection_for_tests(path, db).ok());
    EXPECT_TRUE(db.exec("BEGIN IMMEDIATE").ok());
  }
  void release() { EXPECT_TRUE(db.exec("COMMIT").ok()); }
};

TEST(StoreWriter, FullQueueRefusesInsteadOfGrowingAndGroupCommitHonoursTheLimit) {
  WriterOptions options;
  options.queue_max_readings = 200;
  options.commit_max_readings = 50;
  options.commit_max_time = std::chrono::milliseconds(10000);
  Fixture f(options);
  Results results;
  WriteLockHolder lock(f.dir.file("lphi.db"));
  std::size_t submitted = 0;
  bool refused = false;
  for (int b = 0; b < 100 && !refused; ++b) {
    WriteJob job{f.lockin.id, lockin_run(1 + 10 * b, 10), results.callback()};
    if (f.writer->try_submit(job)) {
      ++submitted;
    } else {
      refused = true;
      // The refused job is handed back untouched.
      EXPECT_EQ(protocol::reading_count(job.readings), 10u);
    }
  }
  EXPECT_TRUE(refused);
  // The bound counts readings queued or being written: 200 of them, 20 jobs.
  EXPECT_EQ(submitted, 20u);
  EXPECT_LE(f.writer->stats().queued_readings, 200u);
  lock.release();
  ASSERT_TRUE(results.wait_for(submitted));
  for (const auto& r : results.done) EXPECT_TRUE(r.status.ok()) << r.status.message();
  EXPECT_EQ(f.stored_lockin().size(), submitted * 10);
  // 200 readings with at most 50 per transaction: at least 4 commits; jobs
  // were grouped, so fewer commits than jobs.
  const auto stats = f.writer->stats();
  EXPECT_GE(stats.commits, 4u);
  EXPECT_LT(stats.commits, submitted);
  EXPECT_EQ(stats.readings_committed, submitted * 10);
}

TEST(StoreWriter, StopWritesWhatIsQueued) {
  Results results;
  lphi::testing::TempDir dir;
  {
    std::unique_ptr<StoreWriter> writer;
    ASSERT_TRUE(StoreWriter::open(dir.file("lphi.db"), {}, writer).ok());
    SourceState thermo;
    ASSERT_TRUE(writer->register_source("mxc", SourceKind::thermometer, thermo).ok());
    writer->start();
    for (int b = 0; b < 10; ++b) {
      std::vector<ThermometerReading> v;
      for (int i = 0; i < 100; ++i) v.push_back({b * 100 + i, 1.7e9 + b * 100 + i, 0.01 + 1e-5 * i, std::nullopt});
      WriteJob job{thermo.id, v, results.callback()};
      ASSERT_TRUE(writer->try_submit(job));
    }
    writer->stop();
    EXPECT_EQ(results.done.size(), 10u);
  }
  // Reopening finds everything, the source's highest seq and a sound file.
  std::unique_ptr<StoreWriter> writer;
  ASSERT_TRUE(StoreWriter::open(dir.file("lphi.db"), {}, writer).ok());
  SourceState thermo;
  ASSERT_TRUE(writer->register_source("mxc", SourceKind::thermometer, thermo).ok());
  EXPECT_EQ(thermo.highest_seq, 999);
  EXPECT_DOUBLE_EQ(*thermo.last_t, 1.7e9 + 999);
  StoreReader reader;
  ASSERT_TRUE(StoreReader::open(dir.file("lphi.db"), reader).ok());
  std::string integrity;
  ASSERT_TRUE(reader.integrity_check(integrity).ok());
  EXPECT_EQ(integrity, "ok");  // SQLite's own verdict on the file
}

TEST(StoreWriter, ASourceNameCannotChangeItsKind) {
  lphi::testing::TempDir dir;
  std::unique_ptr<StoreWriter> writer;
  ASSERT_TRUE(StoreWriter::open(dir.file("lphi.db"), {}, writer).ok());
  SourceState s;
  ASSERT_TRUE(writer->register_source("magnet", SourceKind::field, s).ok());
  const Status again = writer->register_source("magnet", SourceKind::thermometer, s);
  EXPECT_FALSE(again.ok());
  EXPECT_NE(again.message().find("magnet"), std::string::npos) << again.message();
}

TEST(StoreWriter, ReadOnlyConnectionsCannotWrite) {
  Fixture f;
  StoreReader reader;
  ASSERT_TRUE(StoreReader::open(f.dir.file("lphi.db"), reader).ok());
  const Status s = reader.database().exec("DELETE FROM sources");
  EXPECT_FALSE(s.ok());
  EXPECT_NE(s.message().find("readonly"), std::string::npos) << s.message();
}

}  // namespace
}  // namespace lphi::store

namespace lphi::store {
namespace {

// A task (another part of lphid writing through the one writer thread) runs
// in queue order with the readings: it sees every reading submitted before
// it. What it writes is durable when its callback runs (read back here on a
// separate read-only connection), and a task that fails is rolled back alone
// with its error reported, while readings committed in the same transaction
// stay (SQLite SAVEPOINT semantics, https://sqlite.org/lang_savepoint.html).
TEST(StoreWriter, TasksRunInOrderWithReadingsAndFailAlone) {
  Fixture f;
  Results results;
  WriteJob first{f.lockin.id, lockin_run(0, 500), results.callback()};
  ASSERT_TRUE(f.writer->try_submit(first));

  std::int64_t seen_by_task = -1;
  WriteJob counting;
  counting.task = [&seen_by_task](Database& db) {
    Statement st;
    if (auto s = Statement::prepare(db, "SELECT count(*) FROM lockin_readings", st); !s) return s;
    if (st.step() != SQLITE_ROW) return db.error("counting");
    seen_by_task = st.column_int(0);
    // A note that must survive: a sample row, as the live analysis would
    // write its own records.
    return db.exec(
        "INSERT INTO samples (name, model, squares, width_m, thickness_m, excitation_a, lockin_source,"
        " thermometer_source, field_source) VALUES ('film-t', 'hln2d', 1, 1e-4, 1e-8, 1e-8, 'a', 'b', 'c')");
  };
  counting.on_durable = results.callback();
  ASSERT_TRUE(f.writer->try_submit(counting));

  WriteJob failing;
  failing.task = [](Database& db) {
    if (auto s = db.exec("INSERT INTO samples (name, model, squares, width_m, thickness_m, excitation_a,"
                         " lockin_source, thermometer_source, field_source)"
                         " VALUES ('film-u', 'hln2d', 1, 1e-4, 1e-8, 1e-8, 'a', 'b', 'c')");
        !s)
      return s;
    return db.exec("INSERT INTO no_such_table VALUES (1)");  // fails: the row above must go too
  };
  failing.on_durable = results.callback();
  ASSERT_TRUE(f.writer->try_submit(failing));
  WriteJob after{f.lockin.id, lockin_run(500, 500), results.callback()};
  ASSERT_TRUE(f.writer->try_submit(after));
  ASSERT_TRUE(results.wait_for(4));

  EXPECT_TRUE(results.done[0].status.ok());
  EXPECT_TRUE(results.done[1].status.ok()) << results.done[1].status.message();
  EXPECT_FALSE(results.done[2].status.ok());
  EXPECT_NE(results.done[2].status.message().find("no_such_table"), std::string::npos)
      << results.done[2].status.message();
  EXPECT_TRUE(results.done[3].status.ok());
  EXPECT_EQ(seen_by_task, 500);
  EXPECT_EQ(f.stored_lockin().size(), 1000u);

  StoreReader reader;
  ASSERT_TRUE(StoreReader::open(f.dir.file("lphi.db"), reader).ok());
  Statement names;
  ASSERT_TRUE(Statement::prepare(reader.database(), "SELECT name FROM samples ORDER BY name", names).ok());
  std::vector<std::string> got;
  while (names.step() == SQLITE_ROW) got.push_back(names.column_text(0));
  EXPECT_EQ(got, std::vector<std::string>{"film-t"});
}

}  // namespace
}  // namespace lphi::store

namespace lphi::store {
namespace {

// A job that throws on the writer thread does not terminate lphid: the
// exception is caught, the transaction it was in is rolled back (the readings
// submitted with it are not stored and their senders are told so), every job
// still queued is told the writer failed, and the stats say why.
TEST(StoreWriter, ATaskThatThrowsFailsTheWriterWithoutTerminating) {
  WriterOptions options;
  options.commit_max_time = std::chrono::milliseconds(1000);  // one transaction for the first three
  Fixture f(options);
  Results results;
  // Holds the writer so that everything below is queued behind it.
  std::mutex gate;
  std::unique_lock hold(gate);
  WriteJob blocker;
  blocker.task = [&gate](Database&) {
    std::lock_guard wait(gate);
    return Status::success();
  };
  blocker.on_durable = results.callback();
  ASSERT_TRUE(f.writer->try_submit(blocker));
  WriteJob readings{f.lockin.id, lockin_run(0, 100), results.callback()};
  ASSERT_TRUE(f.writer->try_submit(readings));
  WriteJob throwing;
  throwing.task = [](Database&) -> Status { throw std::runtime_error("injected fault in a task"); };
  throwing.on_durable = results.callback();
  ASSERT_TRUE(f.writer->try_submit(throwing));
  hold.unlock();
  ASSERT_TRUE(results.wait_for(3));
  WriteJob later{f.lockin.id, lockin_run(100, 100), results.callback()};
  // After the failure the writer takes nothing more.
  for (int i = 0; i < 100 && f.writer->try_submit(later); ++i) {
    later = WriteJob{f.lockin.id, lockin_run(100, 100), results.callback()};
    std::this_thread::sleep_for(std::chrono::milliseconds(10));
  }
  EXPECT_FALSE(f.writer->try_submit(later));
  {
    std::lock_guard lock(results.mutex);
    ASSERT_GE(results.done.size(), 3u);
    for (const WriteResult& r : results.done) {
      EXPECT_FALSE(r.status.ok());
      EXPECT_EQ(r.accepted, 0u);
      EXPECT_TRUE(r.status.code() == StatusCode::internal || r.status.code() == StatusCode::unavailable)
          << r.status.message();
    }
    EXPECT_NE(results.done[2].status.message().find("injected fault in a task"), std::string::npos)
        << results.done[2].status.message();
  }
  const WriterStats stats = f.writer->stats();
  EXPECT_TRUE(stats.failed);
  EXPECT_EQ(stats.exceptions, 1u);
  EXPECT_NE(stats.last_error.find("injected fault in a task"), std::string::npos) << stats.last_error;
  EXPECT_EQ(stats.queued_jobs, 0u);
  f.writer->stop();
  EXPECT_TRUE(f.stored_lockin().empty());  // the readings of the failed transaction are not stored
}

// A completion callback that throws is caught the same way; the job it
// belonged to is durable and is not told otherwise afterwards.
TEST(StoreWriter, ACompletionThatThrowsIsCaught) {
  Fixture f;
  std::atomic<int> calls{0};
  WriteJob job{f.lockin.id, lockin_run(0, 10), [&calls](const WriteResult& r) {
                 ++calls;
                 if (r.status.ok()) throw std::logic_error("injected fault in a completion");
               }};
  ASSERT_TRUE(f.writer->try_submit(job));
  for (int i = 0; i < 3000 && !f.writer->stats().failed; ++i) {
    std::this_thread::sleep_for(std::chrono::milliseconds(1));
  }
  const WriterStats stats = f.writer->stats();
  EXPECT_TRUE(stats.failed);
  EXPECT_NE(stats.last_error.find("injected fault in a completion"), std::string::npos) << stats.last_error;
  f.writer->stop();
  EXPECT_EQ(calls.load(), 1);
  EXPECT_EQ(f.stored_lockin().size(), 10u);
}

// Only the store opens a write connection: Database::open refuses the mode,
// naming the file and the reason.
TEST(Database, OnlyTheStoreOpensAWriteConnection) {
  lphi::testing::TempDir dir;
  Database db;
  const Status s = Database::open(dir.file("lphi.db"), OpenMode::writer, db);
  EXPECT_EQ(s.code(), StatusCode::invalid_input);
  EXPECT_NE(s.message().find("lphi.db"), std::string::npos) << s.message();
  EXPECT_NE(s.message().find("only the store writer"), std::string::npos) << s.message();
  EXPECT_FALSE(db.is_open());
}

}  // namespace
}  // namespace lphi::store
