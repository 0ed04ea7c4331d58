// The hand-over from lphid's drivers to the store, in process with the real
// IngestServer and StoreWriter: one slot per source, refused while the writer
// is full so that the driver keeps its readings, and the identity answers
// recorded in instrument_identities (schema migration 2).
#include <gtest/gtest.h>
#include <sqlite3.h>

#include <atomic>
#include <chrono>
#include <thread>

#include "daemon/config/data_dir.hpp"
#include "daemon/ingest/ingest_server.hpp"
#include "daemon/store/database.hpp"
#include "daemon/store/writer.hpp"
#include "tests/support/temp_dir.hpp"

namespace lphi::ingest {
namespace {

using namespace std::chrono_literals;
using Clock = std::chrono::steady_clock;

std::int64_t query_int(store::Database& db, const std::string& sql) {
  store::Statement s;
  EXPECT_TRUE(store::Statement::prepare(db, sql, s).ok()) << sql;
  EXPECT_EQ(s.step(), SQLITE_ROW) << sql;
  return s.column_int(0);
}

protocol::Readings thermometer_readings(std::int64_t first_seq, int n, double t0) {
  std::vector<protocol::ThermometerReading> v;
  for (int i = 0; i < n; ++i) v.push_back({first_seq + i, t0 + i, 0.1, 1000.0});
  return v;
}

template <class F>
bool eventually(F done) {
  const auto deadline = Clock::now() + 10s;
  while (Clock::now() < deadline) {
    if (done()) return true;
    std::this_thread::sleep_for(5ms);
  }
  return false;
}

TEST(DriverInbox, RefusesWhileTheWriterIsFullAndStoresEverythingOnceItHasRoom) {
  testing::TempDir dir;
  std::unique_ptr<store::StoreWriter> writer;
  ASSERT_TRUE(store::StoreWriter::open(store::database_path(dir.path()), {}, writer).ok());
  store::SourceState mxc;
  ASSERT_TRUE(writer->register_source("mxc", protocol::SourceKind::thermometer, mxc).ok());
  IngestOptions options;
  options.endpoints = config::daemon_endpoints(dir.path(), "", "");
  options.data_dir = dir.path();
  zmq::context_t context(1);
  std::unique_ptr<IngestServer> server;
  ASSERT_TRUE(IngestServer::create(context, options, *writer, {{"mxc", mxc}}, server).ok());
  std::atomic<bool> stop{false};
  std::thread serving([&] { server->run(stop); });

  // The writer is not started yet, so it takes nothing: like a full queue.
  const double now = std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
  EXPECT_TRUE(server->offer_driver_readings("mxc", thermometer_readings(0, 5, now)));
  // The first hand-over leaves the slot (it waits for the writer), so a
  // second one is taken; then the slot stays full and every further offer
  // is refused: the driver keeps its readings.
  int taken = 1;
  EXPECT_TRUE(eventually([&] { return server->offer_driver_readings("mxc", thermometer_readings(5, 5, now + 5)); }));
  ++taken;
  const auto until = Clock::now() + 300ms;
  while (Clock::now() < until) {
    EXPECT_FALSE(server->offer_driver_readings("mxc", thermometer_readings(10, 5, now + 10)));
    std::this_thread::sleep_for(20ms);
  }
  EXPECT_FALSE(server->offer_driver_readings("nobody", thermometer_readings(0, 1, now)))
      << "an unknown source is refused";
  server->offer_identity("mxc", "lphi-sim,SIM-THERM,0,0.1");

  writer->start();
  EXPECT_TRUE(eventually([&] {
    return server->offer_driver_readings("mxc", thermometer_readings(5 * taken, 5, now + 5 * taken));
  })) << "the slot frees once the writer has room";
  ++taken;
  stop = true;
  serving.join();  // run() stops the writer after writing what is queued

  store::Database db;
  ASSERT_TRUE(store::Database::open(store::database_path(dir.path()), store::OpenMode::read_only, db).ok());
  // Every handed-over reading is stored, seq 0..5*taken-1, without gaps.
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM thermometer_readings"), 5 * taken);
  EXPECT_EQ(query_int(db, "SELECT max(seq) FROM thermometer_readings"), 5 * taken - 1);
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM gaps"), 0);
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM instrument_identities WHERE identity = 'lphi-sim,SIM-THERM,0,0.1'"), 1);
}

TEST(DriverInbox, DriverReadingsPassTheSameChecksAsBatches) {
  // A thermometer reading must have 0 < T < 1000 K (daemon/PROTOCOL.md); a
  // driver's reading out of range is refused like a sender's, and counted.
  testing::TempDir dir;
  std::unique_ptr<store::StoreWriter> writer;
  ASSERT_TRUE(store::StoreWriter::open(store::database_path(dir.path()), {}, writer).ok());
  store::SourceState mxc;
  ASSERT_TRUE(writer->register_source("mxc", protocol::SourceKind::thermometer, mxc).ok());
  writer->start();
  IngestOptions options;
  options.endpoints = config::daemon_endpoints(dir.path(), "", "");
  options.data_dir = dir.path();
  zmq::context_t context(1);
  std::unique_ptr<IngestServer> server;
  ASSERT_TRUE(IngestServer::create(context, options, *writer, {{"mxc", mxc}}, server).ok());
  std::atomic<bool> stop{false};
  std::thread serving([&] { server->run(stop); });
  const double now = std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
  std::vector<protocol::ThermometerReading> v = {{0, now, 0.1, {}}, {1, now + 1, -0.5, {}}, {2, now + 2, 0.2, {}},
                                                 {3, now + 1e6, 0.2, {}}};
  ASSERT_TRUE(server->offer_driver_readings("mxc", v));
  std::this_thread::sleep_for(300ms);
  stop = true;
  serving.join();
  store::Database db;
  ASSERT_TRUE(store::Database::open(store::database_path(dir.path()), store::OpenMode::read_only, db).ok());
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM thermometer_readings"), 2);
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM thermometer_readings WHERE seq IN (1, 3)"), 0)
      << "negative temperature and a time 1e6 s ahead (default tolerance 86400 s) are refused";
}

}  // namespace
}  // namespace lphi::ingest
