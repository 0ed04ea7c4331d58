// Prints lphi's ingest figures (not a test; nothing here is asserted):
//   - the raw SQLite insert ceiling for lphi's own lock-in schema (prepared
//     statement, large transactions), and for a plain rowid table;
//   - readings/s end to end (sender -> lphid -> committed -> acked), for
//     MessagePack and for JSON batches, against the real lphid process;
//   - lphid's commit latency percentiles and its peak resident memory;
//   - bytes per stored reading and the time to fetch one sweep's time window.
//
// Usage: ingest_bench [--readings N] [--json-readings N] [--dir DIR]
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <random>
#include <string>
#include <thread>
#include <zmq.hpp>

#include "daemon/config/data_dir.hpp"
#include "daemon/store/migrations.hpp"
#include "daemon/store/reader.hpp"
#include "daemon/store/test_access.hpp"
#include "drivers/sender/sender.hpp"

extern char** environ;

namespace {

using Clock = std::chrono::steady_clock;
using namespace lphi;

double seconds_since(Clock::time_point t) { return std::chrono::duration<double>(Clock::now() - t).count(); }

protocol::LockinReading reading(std::int64_t seq, double t0) {
  protocol::LockinReading r;
  r.seq = seq;
  r.t = t0 + 0.05 * static_cast<double>(seq);  // 20 Hz
  r.x_v = 1e-6 * (1.0 + 1e-3 * std::sin(1e-3 * static_cast<double>(seq)));
  r.y_v = 1e-9 * std::cos(1e-3 * static_cast<double>(seq));
  return r;
}

// A benchmark on a database that refused a step measures nothing: stop.
void must(const Status& s) {
  if (s) return;
  std::fprintf(stderr, "ingest_bench: %s\n", s.message().c_str());
  std::exit(1);
}

void ceiling(const std::string& dir, std::int64_t n, double t0) {
  for (int variant = 0; variant < 2; ++variant) {
    const std::string path = dir + (variant == 0 ? "/ceiling-schema.db" : "/ceiling-rowid.db");
    std::filesystem::remove(path);
    store::Database db;
    must(store::open_writer_connection_for_tests(path, db));
    if (variant == 0) {
      must(store::apply_migrations(db, store::embedded_migrations()));
      must(db.exec("INSERT INTO sources (id, name, kind) VALUES (1, 'lockin-a', 'lockin')"));
    } else {
      must(db.exec("CREATE TABLE r (source_id INTEGER, seq INTEGER, t REAL, x_v REAL, y_v REAL,"
                   " frequency_hz REAL, range_v REAL, time_constant_s REAL, overload INTEGER)"));
    }
    store::Statement ins;
    must(store::Statement::prepare(db,
                                   variant == 0 ? "INSERT INTO lockin_readings VALUES (?,?,?,?,?,?,?,?,?)"
                                                : "INSERT INTO r VALUES (?,?,?,?,?,?,?,?,?)",
                                   ins));
    const auto began = Clock::now();
    must(db.exec("BEGIN"));
    for (std::int64_t s = 1; s <= n; ++s) {
      const auto r = reading(s, t0);
      ins.bind(1, std::int64_t{1});
      ins.bind(2, s);
      ins.bind(3, r.t);
      ins.bind(4, r.x_v);
      ins.bind(5, r.y_v);
      for (int c = 6; c <= 9; ++c) ins.bind_null(c);
      ins.step();
      ins.reset();
      if (s % 100000 == 0) {
        must(db.exec("COMMIT"));
        must(db.exec("BEGIN"));
      }
    }
    must(db.exec("COMMIT"));
    const double dt = seconds_since(began);
    std::printf("raw SQLite ceiling, %s: %lld rows in %.2f s = %.0f rows/s\n",
                variant == 0 ? "lphi schema (WITHOUT ROWID (source,seq) + index (source,t))"
                             : "plain rowid table, no index",
                static_cast<long long>(n), dt, static_cast<double>(n) / dt);
    std::filesystem::remove(path);
    std::filesystem::remove(path + "-wal");
    std::filesystem::remove(path + "-shm");
  }
}

pid_t start_daemon(const std::string& dir) {
  const std::string config = dir + "/lphid.toml";
  std::ofstream(config) << "[[source]]\nname = \"lockin-a\"\nkind = \"lockin\"\n"
                           "[[source]]\nname = \"lockin-b\"\nkind = \"lockin\"\n";
  std::vector<std::string> args = {LPHID_PATH, "--data-dir", dir, "--config", config, "--log", "file"};
  std::vector<char*> argv;
  for (auto& a : args) argv.push_back(a.data());
  argv.push_back(nullptr);
  pid_t pid = -1;
  posix_spawn(&pid, argv[0], nullptr, nullptr, argv.data(), environ);
  return pid;
}

std::optional<nlohmann::json> status(const std::string& dir) {
  zmq::context_t context(1);
  zmq::socket_t socket(context, zmq::socket_type::dealer);
  socket.set(zmq::sockopt::linger, 0);
  socket.connect(config::client_endpoints(dir).control);
  socket.send(zmq::str_buffer(R"({"type":"status"})"), zmq::send_flags::none);
  zmq::pollitem_t item{socket.handle(), 0, ZMQ_POLLIN, 0};
  zmq::poll(&item, 1, std::chrono::milliseconds(500));
  zmq::message_t reply;
  if (!(item.revents & ZMQ_POLLIN) || !socket.recv(reply, zmq::recv_flags::dontwait)) return std::nullopt;
  return nlohmann::json::parse(reply.to_string_view(), nullptr, false);
}

long peak_rss_kb(pid_t pid) {
  std::ifstream in("/proc/" + std::to_string(pid) + "/status");
  std::string line;
  while (std::getline(in, line)) {
    if (line.rfind("VmHWM:", 0) == 0) return std::stol(line.substr(6));
  }
  return -1;
}

long rss_kb(pid_t pid) {
  std::ifstream in("/proc/" + std::to_string(pid) + "/status");
  std::string line;
  while (std::getline(in, line)) {
    if (line.rfind("VmRSS:", 0) == 0) return std::stol(line.substr(6));
  }
  return -1;
}

void end_to_end(const std::string& dir, pid_t pid, const std::string& source, protocol::Encoding encoding,
                std::int64_t n, double t0) {
  zmq::context_t context(1);
  drivers::SenderOptions o;
  o.endpoint = config::client_endpoints(dir).ingest;
  o.source = source;
  o.encoding = encoding;
  o.batch_max_readings = 5000;
  o.max_batches_in_flight = 8;
  o.spool_max_readings = 100000;
  o.ack_timeout = std::chrono::milliseconds(30000);
  drivers::Sender sender(context, o);
  const auto began = Clock::now();
  std::int64_t next = 1;
  long rss_min = 1L << 40, rss_max = 0;
  auto last_sample = Clock::now();
  while (next <= n) {
    while (next <= n && sender.offer(reading(next, t0))) ++next;
    sender.pump(std::chrono::milliseconds(1));
    if (seconds_since(last_sample) > 1.0) {
      last_sample = Clock::now();
      const long r = rss_kb(pid);
      rss_min = std::min(rss_min, r);
      rss_max = std::max(rss_max, r);
    }
  }
  sender.flush(std::chrono::seconds(600));
  const double dt = seconds_since(began);
  std::printf("end to end, %s batches of 5000: %lld readings in %.2f s = %.0f readings/s "
              "(accepted %llu, resends %llu); lphid RSS over the run %ld..%ld kB\n",
              std::string(protocol::encoding_name(encoding)).c_str(), static_cast<long long>(n), dt,
              static_cast<double>(n) / dt, static_cast<unsigned long long>(sender.totals().accepted),
              static_cast<unsigned long long>(sender.totals().resends), rss_min == (1L << 40) ? 0 : rss_min, rss_max);
}

}  // namespace

int main(int argc, char** argv) {
  std::int64_t n = 10000000, n_json = 1000000;
  std::string dir;
  for (int i = 1; i + 1 < argc; i += 2) {
    if (std::strcmp(argv[i], "--readings") == 0) n = std::atoll(argv[i + 1]);
    if (std::strcmp(argv[i], "--json-readings") == 0) n_json = std::atoll(argv[i + 1]);
    if (std::strcmp(argv[i], "--dir") == 0) dir = argv[i + 1];
  }
  if (dir.empty()) {
    char pattern[] = "/tmp/lphi-bench-XXXXXX";
    dir = ::mkdtemp(pattern);
  }
  const double t0 = 1.7e9;
  std::printf("ingest_bench: %lld MessagePack readings, %lld JSON readings, in %s\n",
              static_cast<long long>(n), static_cast<long long>(n_json), dir.c_str());
  ceiling(dir, std::min<std::int64_t>(n, 5000000), t0);

  const pid_t pid = start_daemon(dir);
  while (!status(dir)) std::this_thread::sleep_for(std::chrono::milliseconds(50));
  end_to_end(dir, pid, "lockin-a", protocol::Encoding::msgpack, n, t0);
  end_to_end(dir, pid, "lockin-b", protocol::Encoding::json, n_json, t0);
  if (auto s = status(dir)) {
    const auto& w = (*s)["writer"];
    std::printf("commit latency (BEGIN..COMMIT, last %d commits): p50 %.2f ms, p99 %.2f ms, p99.9 %.2f ms, max %.2f ms; %llu commits\n",
                65536, w["commit_p50_s"].get<double>() * 1e3, w["commit_p99_s"].get<double>() * 1e3,
                w["commit_p999_s"].get<double>() * 1e3, w["commit_max_s"].get<double>() * 1e3,
                static_cast<unsigned long long>(w["commits"].get<std::uint64_t>()));
  }
  std::printf("lphid peak resident memory (VmHWM): %ld kB\n", peak_rss_kb(pid));
  ::kill(pid, SIGTERM);
  int st = 0;
  ::waitpid(pid, &st, 0);

  // Storage: bytes per reading, and one sweep's window (10 min at 20 Hz).
  const std::string db = store::database_path(dir);
  {
    store::Database w;
    must(store::open_writer_connection_for_tests(db, w));
    must(w.exec("PRAGMA wal_checkpoint(TRUNCATE)"));
  }
  const auto bytes = std::filesystem::file_size(db);
  const auto rows = static_cast<double>(n + n_json);
  std::printf("database: %.1f MB for %.0f readings = %.1f bytes/reading; at 1.5e8 readings: %.1f GB\n",
              static_cast<double>(bytes) / 1e6, rows, static_cast<double>(bytes) / rows,
              static_cast<double>(bytes) / rows * 1.5e8 / 1e9);
  store::StoreReader reader;
  must(store::StoreReader::open(db, reader));
  store::SourceRow src;
  bool found = false;
  must(reader.find_source("lockin-a", src, found));
  std::mt19937 random(7);
  const double span = 0.05 * static_cast<double>(n);
  std::uniform_real_distribution<double> start(0.0, std::max(0.0, span - 600.0));
  double total_s = 0;
  std::size_t fetched = 0;
  const int queries = 50;
  for (int q = 0; q < queries; ++q) {
    const double from = t0 + start(random);
    const auto began = Clock::now();
    must(reader.readings(src, from, from + 600.0, [&](const protocol::Readings& chunk) {
      fetched += protocol::reading_count(chunk);
      return true;
    }));
    total_s += seconds_since(began);
  }
  std::printf("one sweep's window (600 s = %zu readings) out of %lld rows: %.2f ms on average over %d random windows\n",
              fetched / queries, static_cast<long long>(n), total_s / queries * 1e3, queries);
  std::printf("(a B-tree lookup grows as log(rows): at 1.5e8 rows expect about %.2f ms)\n",
              total_s / queries * 1e3 * std::log(1.5e8) / std::log(static_cast<double>(n)));
  std::filesystem::remove_all(dir);
  return 0;
}
