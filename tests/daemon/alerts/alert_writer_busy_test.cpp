// One writer of the database, and an ingest thread that never waits for it.
// In process, with the real StoreWriter, AlertEngine and IngestServer on
// real ipc:// sockets: while another SQLite connection holds the database's
// write lock (as a slow disk or a long transaction would hold the store
// writer), the control socket keeps answering "status", the once-a-second
// health tick keeps feeding the alert engine (which raises writer-lag), and
// the reply to an "ack" arrives only after the lock is released, when the
// acknowledgement is durable.
#include <sqlite3.h>

#include <atomic>
#include <chrono>
#include <cstdio>
#include <future>
#include <stdexcept>
#include <thread>

#include <zmq.hpp>

#include "daemon/config/data_dir.hpp"
#include "daemon/control/control_server.hpp"
#include "daemon/health/failed_parts.hpp"
#include "daemon/health/health_monitor.hpp"
#include "daemon/health/status_reply.hpp"
#include "daemon/ingest/ingest_server.hpp"
#include "tests/daemon/alerts/alert_test_support.hpp"

namespace lphi::alerts {
namespace {

using Clock = std::chrono::steady_clock;
using nlohmann::json;
using testing::find_rule;
using testing::good_fit;
using testing::query_int;

double seconds_since(Clock::time_point t0) {
  return std::chrono::duration<double>(Clock::now() - t0).count();
}

double wall_now() {
  return std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
}

std::optional<json> receive(zmq::socket_t& socket, std::chrono::milliseconds timeout) {
  zmq::pollitem_t item{socket.handle(), 0, ZMQ_POLLIN, 0};
  if (zmq::poll(&item, 1, timeout) <= 0) return std::nullopt;
  zmq::message_t m;
  if (!socket.recv(m, zmq::recv_flags::none)) return std::nullopt;
  return json::parse(m.to_string_view(), nullptr, false);
}

// lphid's ingest thread (with its health tick feeding the engine) and its
// control thread ("status" and the deferred "ack"), as lphid_main wires them.
struct Daemon {
  zmq::context_t context{1};
  ingest::IngestOptions options;
  std::unique_ptr<ingest::IngestServer> server;
  std::unique_ptr<health::HealthMonitor> health;
  std::unique_ptr<control::ControlServer> control;
  health::FailedParts failed_parts;
  std::atomic<int> ticks{0};
  std::atomic<bool> stop{false};
  std::thread serving;

  Daemon(const std::string& dir, testing::EngineOnDisk& e) {
    options.endpoints = config::daemon_endpoints(dir, "", "");
    options.data_dir = dir;
    EXPECT_TRUE(ingest::IngestServer::create(context, options, *e.writer, {}, server).ok());
    EXPECT_TRUE(health::HealthMonitor::create(dir, e.engine.get(), health).ok());
    server->set_tick_handler([this](const ingest::IngestStatus& status) {
      health->on_tick(status);
      ++ticks;
    });
    EXPECT_TRUE(control::ControlServer::create(context, options.endpoints.control, options.limits, control).ok());
    control->add_handler("status", [this](const json&) {
      health::DaemonStatus st;
      st.ingest = server->status();
      st.now_unix = wall_now();
      return health::status_reply(st);
    });
    control->add_deferred_handler("ack", [&e](const json& r, control::Reply reply) {
      e->handle_request(r, [reply](json answer) { reply.send(answer); });
    });
    control->start(&failed_parts);
    serving = std::thread([this] { server->run(stop); });
  }
  ~Daemon() {
    stop = true;
    serving.join();
    control->stop();
  }
};

TEST(OneWriter, StatusAnswersWhileTheWriterIsHeldAndTheAckWaitsForItsCommit) {
  lphi::testing::TempDir dir;
  const std::string db = store::database_path(dir.path());
  AlertConfig config;
  config.writer_lag.max_lag_s = 0.5;  // so that the held writer raises writer-lag from the tick
  auto e = testing::make_engine(db, config);
  ASSERT_TRUE(e.engine);
  FitFact bad = good_fit(1, 100.0);
  bad.chi2_red = 7.0;
  e->on_fit(bad);
  e.settle();
  const std::int64_t id = find_rule(e->list(false), "fit-chi2")->id;

  Daemon d(dir.path(), e);
  auto& ticks = d.ticks;
  auto& context = d.context;
  auto& options = d.options;
  zmq::socket_t status_socket(context, zmq::socket_type::req);
  zmq::socket_t ack_socket(context, zmq::socket_type::dealer);
  for (auto* s : {&status_socket, &ack_socket}) {
    s->set(zmq::sockopt::linger, 0);
    s->connect(options.endpoints.control);
  }

  // Another connection takes the write lock and holds it.
  sqlite3* holder = nullptr;
  ASSERT_EQ(sqlite3_open_v2(db.c_str(), &holder, SQLITE_OPEN_READWRITE, nullptr), SQLITE_OK);
  ASSERT_EQ(sqlite3_exec(holder, "BEGIN IMMEDIATE", nullptr, nullptr, nullptr), SQLITE_OK);
  const auto held_at = Clock::now();
  constexpr double hold_s = 4.0;

  ack_socket.send(zmq::buffer(json{{"type", "ack"}, {"id", id}}.dump()), zmq::send_flags::none);
  const int ticks_before = ticks.load();
  double max_status_s = 0.0;
  int statuses = 0;
  bool ack_early = false;
  while (seconds_since(held_at) < hold_s) {
    const auto sent = Clock::now();
    status_socket.send(zmq::buffer(std::string(R"({"type":"status"})")), zmq::send_flags::none);
    // Generous: far below the hold, so only blocking behind the lock fails it.
    const auto answer = receive(status_socket, std::chrono::milliseconds(2000));
    ASSERT_TRUE(answer) << "no status reply while the writer was held";
    EXPECT_EQ(answer->value("type", ""), "status");
    max_status_s = std::max(max_status_s, seconds_since(sent));
    ++statuses;
    if (receive(ack_socket, std::chrono::milliseconds(0))) ack_early = true;
    std::this_thread::sleep_for(std::chrono::milliseconds(20));
  }
  // The engine still judged the ticks while its writes were queued: writer-lag is raised.
  const bool lag_raised_while_held = find_rule(e->list(false), "writer-lag", "").has_value();
  const int ticks_while_held = ticks.load() - ticks_before;
  ASSERT_EQ(sqlite3_exec(holder, "COMMIT", nullptr, nullptr, nullptr), SQLITE_OK);
  const auto released_at = Clock::now();
  const auto ack = receive(ack_socket, std::chrono::milliseconds(15000));
  const double ack_after_release_s = seconds_since(released_at);
  sqlite3_close(holder);

  std::printf("status answered %d times in at most %.1f ms while the writer was held %.0f s; "
              "%d health ticks; the ack's reply came %.1f ms after the release\n",
              statuses, max_status_s * 1e3, hold_s, ticks_while_held, ack_after_release_s * 1e3);
  EXPECT_LT(max_status_s, 1.0);
  EXPECT_GE(ticks_while_held, 2);
  EXPECT_TRUE(lag_raised_while_held);
  EXPECT_FALSE(ack_early) << "the ack was answered before it could be durable";
  ASSERT_TRUE(ack) << "no reply to the ack after the writer was released";
  EXPECT_EQ(*ack, (json{{"type", "ack"}, {"id", id}, {"state", "acknowledged"}}));
  // Durable when answered: another connection sees it.
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM alert_events WHERE alert_id = " + std::to_string(id) +
                              " AND change = 'acknowledged'"),
            1);
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM alerts WHERE id = " + std::to_string(id) +
                              " AND state = 'acknowledged' AND acked_at IS NOT NULL"),
            1);
  e.settle();
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM alerts WHERE rule = 'writer-lag'"), 1);
  EXPECT_EQ(e->counters().store_errors, 0u);
}

// A writer that stopped on an exception shows in the status reply (and so in
// `lphi status`), and lphid goes on answering; an ack that cannot be stored
// any more is answered with a storage error, not a false "acknowledged".
TEST(OneWriter, AFailedWriterShowsInStatusAndRefusesTheAck) {
  lphi::testing::TempDir dir;
  const std::string db = store::database_path(dir.path());
  auto e = testing::make_engine(db);
  ASSERT_TRUE(e.engine);
  FitFact bad = good_fit(1, 100.0);
  bad.chi2_red = 7.0;
  e->on_fit(bad);
  e.settle();
  const std::int64_t id = e->list(false).at(0).id;

  Daemon d(dir.path(), e);
  auto& context = d.context;
  auto& options = d.options;
  zmq::socket_t control(context, zmq::socket_type::req);
  control.set(zmq::sockopt::linger, 0);
  control.connect(options.endpoints.control);
  auto ask = [&](const json& request) {
    control.send(zmq::buffer(request.dump()), zmq::send_flags::none);
    return receive(control, std::chrono::milliseconds(10000));
  };

  const auto healthy = ask({{"type", "status"}});
  ASSERT_TRUE(healthy);
  EXPECT_EQ(healthy->at("writer").at("failed"), false);
  EXPECT_EQ(healthy->at("writer").at("last_error"), "");

  std::promise<void> thrown;
  store::WriteJob fault;
  fault.task = [](store::Database&) -> Status { throw std::runtime_error("injected fault"); };
  fault.on_durable = [&thrown](const store::WriteResult&) { thrown.set_value(); };
  ASSERT_TRUE(e.writer->try_submit(fault));
  ASSERT_EQ(thrown.get_future().wait_for(std::chrono::seconds(10)), std::future_status::ready);

  const auto failed = ask({{"type", "status"}});
  ASSERT_TRUE(failed);
  EXPECT_EQ(failed->at("writer").at("failed"), true);
  EXPECT_NE(failed->at("writer").at("last_error").get<std::string>().find("injected fault"), std::string::npos)
      << failed->dump();
  const auto refused = ask({{"type", "ack"}, {"id", id}});
  ASSERT_TRUE(refused);
  EXPECT_EQ(refused->value("type", ""), "error") << refused->dump();
  EXPECT_EQ(refused->value("reason", ""), "storage_error") << refused->dump();
  EXPECT_EQ(e->counters().store_pending, 0u);
  EXPECT_EQ(e->list(false).at(0).state, State::raised);  // not acknowledged in memory either
}

// An ack's reply names what is wrong by the Status code at once, without a
// write: an id never given, and an alert already cleared.
TEST(OneWriter, AckOfAMissingOrClearedAlertIsAnsweredAtOnce) {
  lphi::testing::TempDir dir;
  const std::string db = dir.file("lphi.db");
  auto e = testing::make_engine(db);
  FitFact bad = good_fit(1, 100.0);
  bad.chi2_red = 7.0;
  e->on_fit(bad);
  const std::int64_t id = e->list(false).at(0).id;
  e->on_fit(good_fit(2, 200.0));
  e->on_fit(good_fit(3, 300.0));
  ASSERT_TRUE(e->list(false).empty());
  EXPECT_EQ(e->acknowledge(id, 400.0).code(), StatusCode::conflict);
  EXPECT_EQ(e->acknowledge(id + 1, 400.0).code(), StatusCode::not_found);
  EXPECT_EQ(e->acknowledge(0, 400.0).code(), StatusCode::not_found);
  e.settle();
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM alert_events WHERE change = 'acknowledged'"), 0);
}

}  // namespace
}  // namespace lphi::alerts
