// The promise under fire: a sender streams lock-in readings at more than
// 10k/s while lphid is killed with SIGKILL at random moments, 20 times, and
// restarted. Afterwards every reading -- in particular every acknowledged
// one -- is stored exactly once with its exact values, SQLite's
// integrity_check says "ok", and the sender's resends have filled in what the
// kills cut off.
#include <gtest/gtest.h>
#include <sqlite3.h>

#include <atomic>
#include <cmath>
#include <fstream>
#include <mutex>
#include <random>
#include <thread>

#include "daemon/config/data_dir.hpp"
#include "daemon/store/reader.hpp"
#include "tests/support/daemon_process.hpp"
#include "drivers/sender/sender.hpp"
#include "tests/support/temp_dir.hpp"

namespace lphi::testing {
namespace {

using Clock = std::chrono::steady_clock;

protocol::LockinReading reading_for(std::int64_t seq, double t0) {
  protocol::LockinReading r;
  r.seq = seq;
  r.t = t0 + 5e-5 * static_cast<double>(seq);
  r.x_v = 1e-6 * std::cos(static_cast<double>(seq));
  r.y_v = 1e-9 * std::sin(static_cast<double>(seq));
  return r;
}

TEST(Crash, SigkillTwentyTimesLosesNothingAcknowledgedAndStoresNothingTwice) {
  TempDir dir;
  const std::string config = dir.file("lphid-test.toml");
  std::ofstream(config) << test_config();
  DaemonProcess daemon(dir.path(), config);
  ASSERT_TRUE(daemon.start());

  const double t0 = std::floor(std::chrono::duration<double>(
      std::chrono::system_clock::now().time_since_epoch()).count());
  constexpr double target_rate = 20000.0;  // readings per second offered
  std::atomic<bool> generating{true};
  std::atomic<std::int64_t> generated{0};
  std::mutex acked_mutex;
  std::vector<std::uint8_t> acked_times;  // per seq: how many acks covered it
  double generation_seconds = 0.0;
  bool flushed = false;
  std::uint64_t resends = 0, rejected = 0;

  std::thread producer([&] {
    zmq::context_t context(1);
    drivers::SenderOptions options;
    options.endpoint = config::client_endpoints(dir.path()).ingest;
    options.source = "lockin-a";
    options.kind = protocol::SourceKind::lockin;
    options.batch_max_readings = 500;
    options.ack_timeout = std::chrono::milliseconds(700);
    options.spool_max_readings = 1000000;
    drivers::Sender sender(context, options);
    sender.on_ack = [&](const protocol::Readings& batch, const protocol::Ack& ack) {
      std::lock_guard lock(acked_mutex);
      for (const auto& r : std::get<std::vector<protocol::LockinReading>>(batch)) {
        bool refused = false;
        for (const auto& rej : ack.rejected) refused = refused || rej.seq == r.seq;
        if (refused) continue;
        if (acked_times.size() <= static_cast<std::size_t>(r.seq)) acked_times.resize(static_cast<std::size_t>(r.seq) + 1);
        ++acked_times[static_cast<std::size_t>(r.seq)];
      }
    };
    const auto began = Clock::now();
    std::int64_t next = 1;
    while (generating.load()) {
      const double elapsed = std::chrono::duration<double>(Clock::now() - began).count();
      const auto due = static_cast<std::int64_t>(elapsed * target_rate);
      while (next <= due && sender.offer(reading_for(next, t0))) ++next;
      generated.store(next - 1);
      sender.pump(std::chrono::milliseconds(2));
    }
    generation_seconds = std::chrono::duration<double>(Clock::now() - began).count();
    flushed = sender.flush(std::chrono::seconds(60));
    resends = sender.totals().resends;
    rejected = sender.totals().rejected;
  });

  std::mt19937 random(20240229);  // fixed seed: the same kill schedule every run
  std::uniform_int_distribution<int> pause_ms(80, 350);
  int kills = 0;
  for (; kills < 20; ++kills) {
    std::this_thread::sleep_for(std::chrono::milliseconds(pause_ms(random)));
    daemon.kill_hard();
    ASSERT_TRUE(daemon.start()) << "restart " << kills;
  }
  std::this_thread::sleep_for(std::chrono::milliseconds(300));
  generating.store(false);
  producer.join();
  ASSERT_TRUE(flushed) << "the sender could not deliver everything after the last restart";
  EXPECT_EQ(rejected, 0u);
  EXPECT_GT(resends, 0u) << "the kills should have cut off some batches";
  const std::int64_t total = generated.load();
  const double rate = static_cast<double>(total) / generation_seconds;
  std::printf("crash test: %d kills, %lld readings offered at %.0f/s, %llu resends\n", kills,
              static_cast<long long>(total), rate, static_cast<unsigned long long>(resends));
  EXPECT_GE(rate, 10000.0);
  EXPECT_EQ(daemon.stop(), 0);

  // Every reading was acknowledged at least once (resends may be acked twice).
  ASSERT_GE(acked_times.size(), static_cast<std::size_t>(total) + 1);
  for (std::int64_t s = 1; s <= total; ++s) ASSERT_GE(acked_times[static_cast<std::size_t>(s)], 1) << "seq " << s;

  store::StoreReader reader;
  ASSERT_TRUE(store::StoreReader::open(store::database_path(dir.path()), reader).ok());
  std::string integrity;
  ASSERT_TRUE(reader.integrity_check(integrity).ok());
  EXPECT_EQ(integrity, "ok");  // SQLite's verdict on the file after 20 kills

  store::SourceRow source;
  bool found = false;
  ASSERT_TRUE(reader.find_source("lockin-a", source, found).ok());
  ASSERT_TRUE(found);
  // Exactly once: as many rows as readings, each seq once, each value exact.
  std::int64_t rows = 0, distinct = 0;
  {
    store::Statement s;
    ASSERT_TRUE(store::Statement::prepare(reader.database(),
                                          "SELECT count(*), count(DISTINCT seq) FROM lockin_readings", s).ok());
    ASSERT_EQ(s.step(), SQLITE_ROW);
    rows = s.column_int(0);
    distinct = s.column_int(1);
  }
  EXPECT_EQ(rows, total);
  EXPECT_EQ(distinct, total);
  std::int64_t expected_seq = 1;
  ASSERT_TRUE(reader
                  .readings(source, store::all_time_from, store::all_time_to,
                            [&](const protocol::Readings& chunk) {
                              for (const auto& r : std::get<std::vector<protocol::LockinReading>>(chunk)) {
                                EXPECT_EQ(r, reading_for(expected_seq, t0));
                                ++expected_seq;
                              }
                              return true;
                            })
                  .ok());
  EXPECT_EQ(expected_seq, total + 1);
}

}  // namespace
}  // namespace lphi::testing
