// LineStreamDriver against a pushing instrument (connect mode) and as a
// listener that a gateway connects to (listen mode).
#include <gtest/gtest.h>

#include "tests/drivers/instrument/collector.hpp"
#include "drivers/instrument/line_stream_driver.hpp"
#include "tests/drivers/instrument/script_server.hpp"

namespace lphi::drivers {
namespace {

using namespace std::chrono_literals;
using testing::Action;
using testing::Chunk;
using testing::Collector;
using testing::ScriptServer;
using testing::run_until;

constexpr auto limit = 10s;

Action ignore(std::size_t, std::size_t, const std::string&) { return Action::silent(); }

LineStreamConfig csv_thermometer(std::uint16_t port) {
  LineStreamConfig c;
  c.source = "mxc";
  c.kind = protocol::SourceKind::thermometer;
  c.connection.port = port;
  c.connection.terminator = "\r\n";
  c.connection.max_line_bytes = 64;
  c.silence_timeout = 300ms;
  c.stall_after = 100ms;
  c.backoff.min_delay = 5ms;
  c.backoff.max_delay = 20ms;
  c.outlet.first_seq = 7;
  // Columns: instrument time (s), resistance (kOhm), temperature (mK).
  c.fields = {{0, "", "time_s", 1.0}, {2, "", "temperature_k", 1e-3}, {1, "", "resistance_ohm", 1e3}};
  return c;
}

TEST(LineStreamDriver, CsvLinesBecomeReadingsAndEachFaultIsCounted) {
  // One connection's worth of lines: good ones split across writes (the
  // terminator cut in two), a comment, a blank line, garbage, a line too
  // long, a line missing a column; then the instrument hangs up mid-line.
  ScriptServer server(ignore, [](std::size_t connection) -> std::vector<Chunk> {
    if (connection > 0) return {{"1700000100.0,2.5,30.0\r\n", 0ms, false}};
    return {{"# time,R_kohm,T_mK\r\n\r\n1700000000.0,2.0,", 0ms, false},
            {"25.0\r", 10ms, false},
            {"\n1700000001.0,2.1,24.5\r\n", 10ms, false},
            {"not,a,reading\r\n" + std::string(100, '9') + "\r\n1700000002.0,2.2\r\n", 0ms, false},
            {"1700000003.0,2.3,24.0\r\n1700000004.0,2.", 0ms, true}};
  });
  boost::asio::io_context io;
  Collector<protocol::ThermometerReading> sink;
  DriverHooks hooks;
  hooks.sink = sink.sink();
  std::string error;
  auto d = LineStreamDriver::create(io, csv_thermometer(server.port()), std::move(hooks), &error);
  ASSERT_TRUE(d) << error;
  d->start();
  ASSERT_TRUE(run_until(io, [&] { return sink.got.size() >= 4; }, limit));
  const auto s = d->status();
  sink.expect_contiguous_from(7);
  // The instrument's own times and the scaled values, in the order sent.
  const double t[] = {1700000000.0, 1700000001.0, 1700000003.0, 1700000100.0};
  const double kelvin[] = {0.025, 0.0245, 0.024, 0.030};
  const double ohm[] = {2000.0, 2100.0, 2300.0, 2500.0};
  for (std::size_t i = 0; i < 4; ++i) {
    EXPECT_EQ(sink.got[i].t, t[i]);
    EXPECT_DOUBLE_EQ(sink.got[i].temperature_k, kelvin[i]);
    EXPECT_DOUBLE_EQ(*sink.got[i].resistance_ohm, ohm[i]);
  }
  EXPECT_EQ(s.skipped_lines, 2u);
  EXPECT_EQ(s.faults.garbage_replies, 2u);  // "not,a,reading" and the short line
  EXPECT_EQ(s.faults.overlong_lines, 1u);
  EXPECT_EQ(s.faults.partial_lines, 1u);
  EXPECT_EQ(s.faults.disconnects, 1u);
  EXPECT_EQ(s.faults.reconnects, 1u);
}

TEST(LineStreamDriver, SilenceShowsAsStalledThenEndsTheConnection) {
  ScriptServer server(ignore, [](std::size_t) -> std::vector<Chunk> {
    return {{"1700000000.0,2.0,25.0\r\n", 0ms, false}};
  });
  boost::asio::io_context io;
  Collector<protocol::ThermometerReading> sink;
  DriverHooks hooks;
  hooks.sink = sink.sink();
  std::string error;
  auto d = LineStreamDriver::create(io, csv_thermometer(server.port()), std::move(hooks), &error);
  ASSERT_TRUE(d) << error;
  d->start();
  ASSERT_TRUE(run_until(io, [&] { return d->status().state == DriverState::stalled; }, limit));
  EXPECT_EQ(sink.got.size(), 1u);
  ASSERT_TRUE(run_until(io, [&] { return d->status().faults.reply_timeouts >= 2; }, limit));
  EXPECT_GE(server.connections_accepted(), 2u);
  EXPECT_GE(d->status().faults.reconnects, 1u);
}

TEST(LineStreamDriver, ListensForAGatewayAndTakesTheNextOneWhenItLeaves) {
  boost::asio::io_context io;
  Collector<protocol::LockinReading> sink;
  DriverHooks hooks;
  hooks.sink = sink.sink();
  LineStreamConfig c;
  c.source = "gateway";
  c.kind = protocol::SourceKind::lockin;
  c.mode = LineStreamConfig::Mode::listen;
  c.format = LineStreamConfig::Format::json;
  c.connection.port = 0;  // any free port
  c.fields = {{0, "X", "x_v", 1.0}, {0, "Y", "y_v", 1.0}, {0, "ovl", "overload", 1.0}};
  c.outlet.first_seq = 1;
  std::string error;
  auto d = LineStreamDriver::create(io, c, std::move(hooks), &error);
  ASSERT_TRUE(d) << error;
  ASSERT_NE(d->local_port(), 0);
  d->start();

  namespace asio = boost::asio;
  const asio::ip::tcp::endpoint at(asio::ip::make_address("127.0.0.1"), d->local_port());
  for (int gateway = 0; gateway < 2; ++gateway) {
    asio::ip::tcp::socket client(io);
    client.connect(at);  // completes in the kernel's backlog; never waits for the driver
    const std::string lines = gateway == 0
        ? "{\"X\": 1e-6, \"Y\": 2e-7, \"ovl\": false}\n{\"X\": 1.1e-6, \"Y\": 2e-7, \"ovl\": true}\n[]\n"
        : "{\"X\": 1.2e-6, \"Y\": 2e-7, \"ovl\": 0}\n";
    asio::write(client, asio::buffer(lines));
    const std::size_t want = gateway == 0 ? 2 : 3;
    ASSERT_TRUE(run_until(io, [&] { return sink.got.size() >= want; }, limit));
    client.close();
    ASSERT_TRUE(run_until(io, [&] { return d->status().faults.disconnects >= static_cast<std::uint64_t>(gateway + 1); }, limit));
  }
  sink.expect_contiguous_from(1);
  EXPECT_EQ(sink.got[0].x_v, 1e-6);
  EXPECT_EQ(sink.got[1].overload, true);
  EXPECT_EQ(sink.got[2].x_v, 1.2e-6);
  EXPECT_EQ(sink.got[2].overload, false);
  const auto s = d->status();
  EXPECT_EQ(s.faults.garbage_replies, 1u);  // "[]" is JSON but not an object
  EXPECT_EQ(s.faults.reconnects, 1u);
  d->stop();
  run_until(io, [&] { return d->status().state == DriverState::stopped; }, limit);
}

TEST(LineStreamDriver, ABadListenAddressIsRefusedWithAReason) {
  boost::asio::io_context io;
  LineStreamConfig c;
  c.source = "gateway";
  c.kind = protocol::SourceKind::field;
  c.mode = LineStreamConfig::Mode::listen;
  c.connection.host = "not-an-address";
  c.fields = {{0, "", "field_t", 1.0}};
  DriverHooks hooks;
  hooks.sink = [](protocol::Readings&&) { return true; };
  std::string error;
  EXPECT_FALSE(LineStreamDriver::create(io, c, hooks, &error));
  EXPECT_NE(error.find("not an IP address"), std::string::npos) << error;
  c.connection.host = "127.0.0.1";
  hooks.sink = nullptr;
  EXPECT_FALSE(LineStreamDriver::create(io, c, hooks, &error));
  EXPECT_NE(error.find("no sink"), std::string::npos) << error;
}

}  // namespace
}  // namespace lphi::drivers
