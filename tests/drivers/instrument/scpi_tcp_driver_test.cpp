// ScpiTcpDriver against a scripted instrument on loopback: a good one, and
// one fault at a time. Each test checks the fault is counted under its own
// name, that the driver recovers, and that every reading it handed to the
// sink is there with contiguous sequence numbers. Waits are bounded (a test
// fails rather than hangs) and wait on conditions, never on sleeps.
#include <gtest/gtest.h>

#include <atomic>

#include "tests/drivers/instrument/collector.hpp"
#include "drivers/instrument/scpi_tcp_driver.hpp"
#include "tests/drivers/instrument/script_server.hpp"

namespace lphi::drivers {
namespace {

using namespace std::chrono_literals;
using protocol::LockinReading;
using testing::Action;
using testing::Collector;
using testing::ScriptServer;
using testing::run_until;

constexpr auto limit = 10s;  // bound on every wait; a healthy run needs far less

// A lock-in that answers *IDN? and SNAP? with X, Y in millivolts and the
// frequency, unless `fault` (called with the number of the SNAP? query, from
// 0, across all connections) says otherwise.
struct Lockin {
  std::atomic<int> snaps{0};
  std::function<std::optional<Action>(int snap)> fault;
  ScriptServer::Script script() {
    return [this](std::size_t, std::size_t, const std::string& line) -> Action {
      if (line == "*IDN?") return Action::reply("LPHI-TEST,LOCKIN,0001,1.0");
      if (line == "SNAP?") {
        const int n = snaps++;
        if (fault) {
          if (auto a = fault(n)) return *a;
        }
        return Action::reply("+1.500E+00,-2.500E-01,13.7");
      }
      return Action::reply("ERR");
    };
  }
};

ScpiTcpConfig lockin_config(std::uint16_t port) {
  ScpiTcpConfig c;
  c.source = "lockin1";
  c.kind = protocol::SourceKind::lockin;
  c.connection.port = port;
  c.connection.connect_timeout = 500ms;
  c.poll_interval = 10ms;
  c.reply_timeout = 200ms;
  c.stall_after = 150ms;
  c.backoff.min_delay = 5ms;
  c.backoff.max_delay = 40ms;
  c.outlet.first_seq = 1000;
  c.queries = {{"SNAP?", {{0, "", "x_v", 1e-3}, {1, "", "y_v", 1e-3}, {2, "", "frequency_hz", 1.0}}}};
  return c;
}

struct Rig {
  boost::asio::io_context io;
  Collector<LockinReading> sink;
  std::vector<std::string> identities;
  std::unique_ptr<ScpiTcpDriver> driver;
  void make(ScpiTcpConfig c) {
    std::string error;
    DriverHooks hooks;
    hooks.sink = sink.sink();
    hooks.on_identity = [this](std::string_view id) { identities.emplace_back(id); };
    driver = ScpiTcpDriver::create(io, std::move(c), std::move(hooks), &error);
    ASSERT_TRUE(driver) << error;
    driver->start();
  }
  bool wait_readings(std::size_t n) {
    return run_until(io, [&] { return sink.got.size() >= n; }, limit);
  }
  ~Rig() {
    if (driver) driver->stop();
    if (driver) run_until(io, [&] { return driver->status().state == DriverState::stopped; }, limit);
  }
};

TEST(ScpiTcpDriver, PollsAGoodInstrumentAndReportsItsIdentity) {
  Lockin lockin;
  ScriptServer server(lockin.script());
  Rig rig;
  const double before = std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
  rig.make(lockin_config(server.port()));
  ASSERT_TRUE(rig.wait_readings(20));
  const double after = std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
  ASSERT_EQ(rig.identities.size(), 1u);
  EXPECT_EQ(rig.identities[0], "LPHI-TEST,LOCKIN,0001,1.0");
  const auto s = rig.driver->status();
  EXPECT_EQ(s.identity, "LPHI-TEST,LOCKIN,0001,1.0");
  EXPECT_EQ(s.state, DriverState::connected);
  EXPECT_EQ(s.faults, FaultCounters{});
  rig.sink.expect_contiguous_from(1000);
  for (const auto& r : rig.sink.got) {
    // The reply's decimal strings scaled by the configured 1e-3 (mV to V).
    EXPECT_DOUBLE_EQ(r.x_v, 1.5e-3);
    EXPECT_DOUBLE_EQ(r.y_v, -0.25e-3);
    EXPECT_EQ(r.frequency_hz, 13.7);
    EXPECT_FALSE(r.range_v);
    // No time_s mapped: the time is the arrival time.
    EXPECT_GE(r.t, before);
    EXPECT_LE(r.t, after);
  }
  for (std::size_t i = 1; i < rig.sink.got.size(); ++i) EXPECT_GE(rig.sink.got[i].t, rig.sink.got[i - 1].t);
  EXPECT_GT(s.bytes_sent, 0u);
  EXPECT_GT(s.bytes_received, 0u);
}

TEST(ScpiTcpDriver, GarbageRepliesAreCountedAndTheConnectionStays) {
  Lockin lockin;
  lockin.fault = [](int n) -> std::optional<Action> {
    if (n == 3) return Action::reply("#!garbage!#");
    if (n == 5) return Action::reply("1.0,NAN,13.7");
    if (n == 7) return Action::reply("9.91E37,0,13.7");  // SCPI's not-a-number marker
    return std::nullopt;
  };
  ScriptServer server(lockin.script());
  Rig rig;
  rig.make(lockin_config(server.port()));
  ASSERT_TRUE(rig.wait_readings(10));
  const auto s = rig.driver->status();
  EXPECT_EQ(s.faults.garbage_replies, 3u);
  EXPECT_EQ(s.faults.reconnects, 0u);
  EXPECT_EQ(s.faults.disconnects, 0u);
  EXPECT_EQ(server.connections_accepted(), 1u);
  rig.sink.expect_contiguous_from(1000);  // garbage polls make no reading and use no seq
}

TEST(ScpiTcpDriver, APartialReplyTimesOutAndTheDriverReconnects) {
  Lockin lockin;
  lockin.fault = [](int n) -> std::optional<Action> {
    if (n == 2) return Action::partial("+1.500E+00,-2.5");
    return std::nullopt;
  };
  ScriptServer server(lockin.script());
  Rig rig;
  rig.make(lockin_config(server.port()));
  ASSERT_TRUE(rig.wait_readings(10));
  const auto s = rig.driver->status();
  EXPECT_EQ(s.faults.partial_lines, 1u);
  EXPECT_EQ(s.faults.reply_timeouts, 0u);
  EXPECT_EQ(s.faults.reconnects, 1u);
  EXPECT_EQ(rig.identities.size(), 2u);  // asked again on the new connection
  rig.sink.expect_contiguous_from(1000);
}

TEST(ScpiTcpDriver, ASlowReplyIsATimeoutAndItsLateAnswerIsNeverUsed) {
  Lockin lockin;
  // The late reply carries a different X: if the driver took it as the
  // answer to a later query, a reading would show it.
  lockin.fault = [](int n) -> std::optional<Action> {
    if (n == 2) return Action::reply("+9.000E+00,0,13.7", 600ms);
    return std::nullopt;
  };
  ScriptServer server(lockin.script());
  Rig rig;
  rig.make(lockin_config(server.port()));
  ASSERT_TRUE(run_until(rig.io, [&] { return rig.sink.got.size() >= 10 && rig.driver->status().faults.reply_timeouts >= 1; }, limit));
  // Keep polling past the moment the late reply was sent.
  const auto sent_late = std::chrono::steady_clock::now() + 600ms;
  ASSERT_TRUE(run_until(rig.io, [&] { return std::chrono::steady_clock::now() > sent_late + 100ms; }, limit));
  const auto s = rig.driver->status();
  EXPECT_EQ(s.faults.reply_timeouts, 1u);
  EXPECT_EQ(s.faults.reconnects, 1u);
  for (const auto& r : rig.sink.got) EXPECT_DOUBLE_EQ(r.x_v, 1.5e-3);
  rig.sink.expect_contiguous_from(1000);
}

TEST(ScpiTcpDriver, ADisconnectInTheMiddleOfAReplyIsCountedTwice) {
  Lockin lockin;
  lockin.fault = [](int n) -> std::optional<Action> {
    if (n == 4) return Action::disconnect_mid("+1.500E+00,-2.5");
    return std::nullopt;
  };
  ScriptServer server(lockin.script());
  Rig rig;
  rig.make(lockin_config(server.port()));
  ASSERT_TRUE(rig.wait_readings(10));
  const auto s = rig.driver->status();
  // Both facts are recorded: the line was cut, and the peer went away.
  EXPECT_EQ(s.faults.disconnects, 1u);
  EXPECT_EQ(s.faults.partial_lines, 1u);
  EXPECT_EQ(s.faults.reconnects, 1u);
  rig.sink.expect_contiguous_from(1000);
}

TEST(ScpiTcpDriver, AnOverlongReplyIsDiscardedAndCounted) {
  Lockin lockin;
  lockin.fault = [](int n) -> std::optional<Action> {
    if (n == 1) return Action::reply(std::string(20000, '7'));
    return std::nullopt;
  };
  ScriptServer server(lockin.script());
  Rig rig;
  auto c = lockin_config(server.port());
  c.connection.max_line_bytes = 256;
  rig.make(c);
  ASSERT_TRUE(rig.wait_readings(5));
  const auto s = rig.driver->status();
  EXPECT_EQ(s.faults.overlong_lines, 1u);
  // Its query got no usable line in time: a timeout, then a new connection.
  EXPECT_EQ(s.faults.reply_timeouts, 1u);
  rig.sink.expect_contiguous_from(1000);
}

TEST(ScpiTcpDriver, SurvivesAServerRestart) {
  Lockin lockin;
  ScriptServer server(lockin.script());
  Rig rig;
  rig.make(lockin_config(server.port()));
  ASSERT_TRUE(rig.wait_readings(5));
  server.shut_down();
  // While the instrument is off, the driver tries, is refused, and backs off.
  ASSERT_TRUE(run_until(rig.io, [&] { return rig.driver->status().faults.connect_failures >= 2; }, limit));
  EXPECT_EQ(rig.driver->status().state, DriverState::backoff);
  const std::size_t before = rig.sink.got.size();
  server.restart();
  ASSERT_TRUE(rig.wait_readings(before + 5));
  const auto s = rig.driver->status();
  EXPECT_EQ(s.state, DriverState::connected);
  EXPECT_EQ(s.faults.disconnects, 1u);
  EXPECT_EQ(s.faults.reconnects, 1u);
  EXPECT_EQ(rig.identities.size(), 2u);
  rig.sink.expect_contiguous_from(1000);
}

TEST(ScpiTcpDriver, AnInstrumentThatAcceptsButNeverAnswersIsRetried) {
  ScriptServer server([](std::size_t, std::size_t, const std::string&) { return Action::silent(); });
  Rig rig;
  rig.make(lockin_config(server.port()));
  ASSERT_TRUE(run_until(rig.io, [&] { return rig.driver->status().faults.reply_timeouts >= 3; }, limit));
  const auto s = rig.driver->status();
  EXPECT_GE(server.connections_accepted(), 3u);
  EXPECT_TRUE(s.identity.empty());
  EXPECT_EQ(s.readings, 0u);
  EXPECT_NE(s.last_error.find("no reply"), std::string::npos) << s.last_error;
  EXPECT_TRUE(rig.sink.got.empty());
}

TEST(ScpiTcpDriver, RefusedConnectionsBackOffAndAreCounted) {
  Rig rig;
  auto c = lockin_config(testing::unused_port());
  c.backoff.min_delay = 20ms;
  c.backoff.max_delay = 80ms;
  rig.make(c);
  ASSERT_TRUE(run_until(rig.io, [&] { return rig.driver->status().faults.connect_failures >= 4; }, limit));
  const auto s = rig.driver->status();
  EXPECT_EQ(s.state, DriverState::backoff);
  EXPECT_EQ(s.faults.connect_timeouts, 0u);
  EXPECT_NE(s.last_error.find("connect failed"), std::string::npos) << s.last_error;
}

TEST(ScpiTcpDriver, AStalledInstrumentShowsInTheStatus) {
  // Replies come, but none parses: connected, no reading, so stalled.
  ScriptServer server([](std::size_t, std::size_t, const std::string& line) {
    return line == "*IDN?" ? Action::reply("X") : Action::reply("OVLD");
  });
  Rig rig;
  rig.make(lockin_config(server.port()));
  ASSERT_TRUE(run_until(rig.io, [&] { return rig.driver->status().state == DriverState::stalled; }, limit));
  EXPECT_GT(rig.driver->status().faults.garbage_replies, 3u);
}

TEST(ScpiTcpDriver, BackPressureBuffersAndDeliversInOrderLater) {
  Lockin lockin;
  ScriptServer server(lockin.script());
  Rig rig;
  rig.sink.refuse = true;
  rig.make(lockin_config(server.port()));
  ASSERT_TRUE(run_until(rig.io, [&] { return rig.driver->status().buffered >= 10; }, limit));
  EXPECT_GT(rig.driver->status().sink_refusals, 0u);
  rig.sink.refuse = false;
  ASSERT_TRUE(run_until(rig.io, [&] {
    const auto s = rig.driver->status();
    return s.buffered == 0 && rig.sink.got.size() >= 15;
  }, limit));
  rig.sink.expect_contiguous_from(1000);
  EXPECT_EQ(rig.driver->status().dropped_readings, 0u);
}

TEST(ScpiTcpDriver, AFullBufferDropsReadingsAndLeavesARecordedGap) {
  Lockin lockin;
  ScriptServer server(lockin.script());
  Rig rig;
  rig.sink.refuse = true;
  auto c = lockin_config(server.port());
  c.outlet.max_buffered_readings = 4;
  rig.make(c);
  ASSERT_TRUE(run_until(rig.io, [&] { return rig.driver->status().dropped_readings >= 3; }, limit));
  EXPECT_EQ(rig.driver->status().buffered, 4u);
  rig.sink.refuse = false;
  ASSERT_TRUE(rig.wait_readings(8));
  const auto s = rig.driver->status();
  // The first four were kept; the dropped ones used their numbers.
  for (std::int64_t i = 0; i < 4; ++i) EXPECT_EQ(rig.sink.got[static_cast<std::size_t>(i)].seq, 1000 + i);
  EXPECT_GE(rig.sink.got[4].seq - rig.sink.got[3].seq - 1, 3);
  EXPECT_EQ(static_cast<std::uint64_t>(rig.sink.got.back().seq - 1000 + 1),
            rig.sink.got.size() + s.dropped_readings);
}

TEST(ScpiTcpDriver, AMisbehavingInstrumentDoesNotSlowAnotherDriver) {
  // Two drivers on one io_context, run by one thread: one polls a good
  // instrument every 20 ms, one talks to an instrument that never answers
  // (1 s reply timeout) and another that hangs up mid-line. If any I/O
  // blocked, the good driver would see a gap of a whole timeout.
  Lockin good;
  ScriptServer good_server(good.script());
  ScriptServer mute([](std::size_t, std::size_t, const std::string&) { return Action::silent(); });
  ScriptServer rude([](std::size_t, std::size_t, const std::string&) {
    return Action::disconnect_mid("1.0,2");
  });
  boost::asio::io_context io;
  Collector<LockinReading> good_sink, bad_sink;
  auto make = [&](ScpiTcpConfig c, Collector<LockinReading>& sink) {
    DriverHooks hooks;
    hooks.sink = sink.sink();
    std::string error;
    auto d = ScpiTcpDriver::create(io, std::move(c), std::move(hooks), &error);
    EXPECT_TRUE(d) << error;
    d->start();
    return d;
  };
  auto gc = lockin_config(good_server.port());
  gc.poll_interval = 20ms;
  auto mc = lockin_config(mute.port());
  mc.source = "mute";
  mc.reply_timeout = 1000ms;
  auto rc = lockin_config(rude.port());
  rc.source = "rude";
  auto g = make(gc, good_sink);
  auto m = make(mc, bad_sink);
  auto r = make(rc, bad_sink);
  ASSERT_TRUE(run_until(io, [&] { return good_sink.got.size() >= 1; }, limit));
  const std::size_t start = good_sink.got.size();
  testing::run_for(io, 1500ms);
  const std::size_t polled = good_sink.got.size() - start;
  // 1.5 s at 20 ms is 75 polls; at least half must have come (a loaded
  // machine may delay some, a blocked loop would lose a second at a time).
  EXPECT_GE(polled, 37u);
  std::chrono::steady_clock::duration worst{};
  for (std::size_t i = start + 1; i < good_sink.arrived.size(); ++i)
    worst = std::max(worst, good_sink.arrived[i] - good_sink.arrived[i - 1]);
  // Well below the mute instrument's 1 s timeout.
  EXPECT_LT(worst, 500ms);
  EXPECT_GE(m->status().faults.reply_timeouts + m->status().faults.connect_failures, 1u);
  EXPECT_GE(r->status().faults.disconnects, 5u);
  EXPECT_EQ(g->status().faults, FaultCounters{});
  EXPECT_TRUE(bad_sink.got.empty());
  good_sink.expect_contiguous_from(1000);
  g->stop();
  m->stop();
  r->stop();
  run_until(io, [&] { return r->status().state == DriverState::stopped; }, limit);
}

}  // namespace
}  // namespace lphi::drivers
