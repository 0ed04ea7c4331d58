// The driver section of [[source]]: what is given reaches the driver's
// config, and every mistake is an error naming the line and the dotted key
// (line numbers are counted in each test's own text).
#include <gtest/gtest.h>

#include "daemon/config/config.hpp"

namespace lphi::config {
namespace {

const char* const kScpiSource =
    "[[source]]\n"                    // 1
    "name = \"lockin\"\n"             // 2
    "kind = \"lockin\"\n"             // 3
    "driver = \"scpi-tcp\"\n"         // 4
    "address = \"127.0.0.1:5025\"\n"  // 5
    "poll_interval_ms = 200\n"        // 6
    "reply_timeout_ms = 700\n"        // 7
    "terminator = \"\\r\\n\"\n"       // 8
    "reconnect_max_ms = 4000\n"       // 9
    "time_future_tolerance_s = 1e6\n" // 10
    "[[source.query]]\n"              // 11
    "send = \"MEAS:ALL?\"\n"          // 12
    "[[source.query.field]]\n"        // 13
    "index = 0\n"                     // 14
    "quantity = \"time_s\"\n"         // 15
    "[[source.query.field]]\n"        // 16
    "index = 1\n"                     // 17
    "quantity = \"x_v\"\n"            // 18
    "scale = 1e-6\n"                  // 19
    "[[source.query.field]]\n"        // 20
    "index = 2\n"                     // 21
    "quantity = \"y_v\"\n";           // 22

TEST(DriverConfig, AScpiTcpSourceReachesTheDriversConfig) {
  Config c;
  const auto errors = parse_config(kScpiSource, c);
  for (const auto& e : errors) ADD_FAILURE() << format_error("text", e);
  ASSERT_EQ(c.sources.size(), 1u);
  const SourceConfig& s = c.sources[0];
  EXPECT_EQ(s.driver, DriverType::scpi_tcp);
  ASSERT_TRUE(s.time_future_tolerance_s);
  EXPECT_DOUBLE_EQ(*s.time_future_tolerance_s, 1e6);
  const auto& d = s.scpi_tcp;
  EXPECT_EQ(d.source, "lockin");
  EXPECT_EQ(d.kind, protocol::SourceKind::lockin);
  EXPECT_EQ(d.connection.host, "127.0.0.1");
  EXPECT_EQ(d.connection.port, 5025);
  EXPECT_EQ(d.connection.terminator, "\r\n");
  EXPECT_EQ(d.poll_interval.count(), 200);
  EXPECT_EQ(d.reply_timeout.count(), 700);
  EXPECT_EQ(d.backoff.max_delay.count(), 4000);
  EXPECT_EQ(d.identity_query, "*IDN?");  // the default (DRIVERS.md)
  ASSERT_EQ(d.queries.size(), 1u);
  EXPECT_EQ(d.queries[0].send, "MEAS:ALL?");
  ASSERT_EQ(d.queries[0].fields.size(), 3u);
  EXPECT_EQ(d.queries[0].fields[1].index, 1u);
  EXPECT_EQ(d.queries[0].fields[1].quantity, "x_v");
  EXPECT_DOUBLE_EQ(d.queries[0].fields[1].scale, 1e-6);
  EXPECT_DOUBLE_EQ(d.queries[0].fields[2].scale, 1.0);
}

TEST(DriverConfig, TheExampleHasADriverThatValidates) {
  Config c;
  const auto errors = parse_config(example_config(), c);
  for (const auto& e : errors) ADD_FAILURE() << format_error("example", e);
  const SourceConfig* s = c.find_source("lockin-a");
  ASSERT_NE(s, nullptr);
  EXPECT_EQ(s->driver, DriverType::scpi_tcp);
  EXPECT_EQ(s->scpi_tcp.connection.port, 5025);
  EXPECT_TRUE(drivers::validate(s->scpi_tcp).empty());
  // The other sources of the example are fed through the ingest socket.
  EXPECT_EQ(c.find_source("mxc")->driver, DriverType::none);
}

// The first error for `text`, expected at `line` with `key`.
void expect_error(const std::string& text, std::size_t line, const std::string& key,
                  const std::string& words) {
  Config c;
  const auto errors = parse_config(text, c);
  ASSERT_FALSE(errors.empty()) << "accepted:\n" << text;
  EXPECT_EQ(errors[0].line, line) << format_error("text", errors[0]);
  EXPECT_EQ(errors[0].key, key) << format_error("text", errors[0]);
  EXPECT_NE(errors[0].message.find(words), std::string::npos) << format_error("text", errors[0]);
}

TEST(DriverConfig, AnUnknownKeyDeepInsideAQueryNamesItsLineAndPath) {
  std::string text = kScpiSource;
  text += "quantty = \"y_v\"\n";  // 23: a typo in the last field table
  expect_error(text, 23, "source[0].query[0].field[2].quantty", "unknown key");
}

TEST(DriverConfig, DriverSettingsWithoutADriverAreRefused) {
  expect_error("[[source]]\nname = \"mxc\"\nkind = \"thermometer\"\naddress = \"127.0.0.1:1\"\n", 1,
               "source[0].address", "driver");
}

TEST(DriverConfig, ABadAddressIsRefused) {
  for (const char* address : {"127.0.0.1", "127.0.0.1:0", "127.0.0.1:70000", ":5025", "host:50x"}) {
    expect_error(std::string("[[source]]\nname = \"a\"\nkind = \"field\"\ndriver = \"scpi-tcp\"\n"
                             "address = \"") + address + "\"\n[[source.query]]\nsend = \"F?\"\n"
                 "[[source.query.field]]\nquantity = \"field_t\"\n",
                 5, "source[0].address", "host:port");
  }
}

TEST(DriverConfig, AScpiTcpSourceNeedsAnAddressAndAQuery) {
  expect_error("[[source]]\nname = \"a\"\nkind = \"field\"\ndriver = \"scpi-tcp\"\naddress = \"h:1\"\n", 1,
               "source[0].query", "at least one");
  expect_error("[[source]]\nname = \"a\"\nkind = \"field\"\ndriver = \"scpi-tcp\"\n", 1,
               "source[0].address", "required");
}

TEST(DriverConfig, AQueryThatLacksARequiredQuantityIsRefusedByTheDriversCheck) {
  // A lock-in needs x_v and y_v (DRIVERS.md); the driver library says which.
  Config c;
  const auto errors = parse_config(
      "[[source]]\nname = \"li\"\nkind = \"lockin\"\ndriver = \"scpi-tcp\"\naddress = \"h:1\"\n"
      "[[source.query]]\nsend = \"X?\"\n[[source.query.field]]\nquantity = \"x_v\"\n",
      c);
  ASSERT_EQ(errors.size(), 1u);
  EXPECT_EQ(errors[0].line, 1u);
  EXPECT_EQ(errors[0].key, "source[0]");
  EXPECT_NE(errors[0].message.find("y_v"), std::string::npos) << errors[0].message;
}

TEST(DriverConfig, SettingsOfTheOtherDriverAreRefused) {
  expect_error("[[source]]\nname = \"a\"\nkind = \"field\"\ndriver = \"line-stream\"\naddress = \"h:1\"\n"
               "poll_interval_ms = 100\n[[source.field]]\nquantity = \"field_t\"\n",
               1, "source[0].poll_interval_ms", "scpi-tcp setting");
}

TEST(DriverConfig, ALineStreamSourceReachesTheDriversConfig) {
  Config c;
  const auto errors = parse_config(
      "[[source]]\nname = \"mag\"\nkind = \"field\"\ndriver = \"line-stream\"\naddress = \"0.0.0.0:7000\"\n"
      "mode = \"listen\"\nformat = \"json\"\nsilence_timeout_ms = 3000\n"
      "[[source.field]]\nkey = \"B\"\nquantity = \"field_t\"\n",
      c);
  for (const auto& e : errors) ADD_FAILURE() << format_error("text", e);
  ASSERT_EQ(c.sources.size(), 1u);
  const auto& d = c.sources[0].line_stream;
  EXPECT_EQ(c.sources[0].driver, DriverType::line_stream);
  EXPECT_EQ(d.mode, drivers::LineStreamConfig::Mode::listen);
  EXPECT_EQ(d.format, drivers::LineStreamConfig::Format::json);
  EXPECT_EQ(d.silence_timeout.count(), 3000);
  ASSERT_EQ(d.fields.size(), 1u);
  EXPECT_EQ(d.fields[0].key, "B");
}

}  // namespace
}  // namespace lphi::config
