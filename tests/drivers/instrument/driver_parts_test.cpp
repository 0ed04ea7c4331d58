// The pure parts of the drivers: line framing, field parsing, the backoff
// schedule, the outlet's numbering and back-pressure, config validation.
#include <gtest/gtest.h>

#include <cmath>
#include <string>

#include "drivers/instrument/backoff.hpp"
#include "drivers/instrument/driver_config.hpp"
#include "drivers/instrument/line_framer.hpp"
#include "drivers/instrument/quantities.hpp"
#include "drivers/instrument/reading_outlet.hpp"

namespace lphi::drivers {
namespace {

using protocol::LockinReading;
using protocol::SourceKind;

TEST(LineFramer, SplitsAtTheTerminatorEvenWhenItIsCutBetweenReads) {
  LineFramer f("\r\n", 64);
  f.feed("1.0,2.0\r");
  EXPECT_FALSE(f.has_line());
  f.feed("\n3.0,");
  ASSERT_TRUE(f.has_line());
  EXPECT_EQ(*f.next_line(), "1.0,2.0");
  EXPECT_EQ(f.partial_bytes(), 4u);
  f.feed("4.0\r\n\r\n");
  EXPECT_EQ(*f.next_line(), "3.0,4.0");
  EXPECT_EQ(*f.next_line(), "");
  EXPECT_FALSE(f.next_line());
}

TEST(LineFramer, DiscardsAnOverlongLineUpToItsTerminatorAndCountsIt) {
  LineFramer f("\n", 16);
  f.feed(std::string(10, 'a'));
  f.feed(std::string(10, 'b'));  // 20 bytes, no terminator: over the bound
  EXPECT_EQ(f.take_overlong(), 1u);
  EXPECT_EQ(f.partial_bytes(), 0u);
  f.feed(std::string(1000, 'c'));  // still the same line: not counted again, not kept
  EXPECT_EQ(f.take_overlong(), 0u);
  f.feed("dd\nok\n");
  EXPECT_EQ(*f.next_line(), "ok");  // the tail of the long line went with it
  EXPECT_FALSE(f.has_line());
  // A complete over-long line in one read is counted too; a line of exactly
  // the bound is kept.
  f.feed(std::string(17, 'x') + "\n" + std::string(16, 'y') + "\n");
  EXPECT_EQ(f.take_overlong(), 1u);
  EXPECT_EQ(*f.next_line(), std::string(16, 'y'));
}

TEST(Quantities, NumbersAreParsedStrictly) {
  // SCPI NR3 with explicit sign, as IEEE 488.2 allows.
  EXPECT_EQ(parse_number(" +1.234E-03 "), 1.234e-3);
  EXPECT_EQ(parse_number("-7"), -7.0);
  EXPECT_FALSE(parse_number(""));
  EXPECT_FALSE(parse_number("1.0V"));
  EXPECT_FALSE(parse_number("++1"));
  EXPECT_FALSE(parse_number("nan"));
  EXPECT_FALSE(parse_number("inf"));
  EXPECT_FALSE(parse_number("1e400"));  // overflows a double
  // SCPI's not-a-number (9.91E37) and overflow (9.9E37) markers.
  EXPECT_FALSE(parse_number("9.91E37"));
  EXPECT_FALSE(parse_number("-9.9E37"));
  EXPECT_EQ(parse_boolean("ON"), true);
  EXPECT_EQ(parse_boolean("off"), false);
  EXPECT_EQ(parse_boolean("+1"), true);
  EXPECT_EQ(parse_boolean("0"), false);
  EXPECT_FALSE(parse_boolean("2"));
}

TEST(Quantities, DelimitedFieldsMapToScaledQuantities) {
  const std::vector<FieldMap> fields = {{0, "", "x_v", 1e-3}, {2, "", "overload", 1.0}, {1, "", "y_v", 1e-3}};
  QuantityValues v;
  EXPECT_EQ(extract_delimited(fields, "1.5,-2.5,1\r", ',', v), "");
  EXPECT_DOUBLE_EQ(*v[Quantity::x_v], 1.5e-3);
  EXPECT_DOUBLE_EQ(*v[Quantity::y_v], -2.5e-3);
  EXPECT_EQ(*v[Quantity::overload], 1.0);
  QuantityValues w;
  EXPECT_NE(extract_delimited(fields, "1.5,-2.5", ',', w).find("missing"), std::string::npos);
  EXPECT_NE(extract_delimited(fields, "1.5,abc,0", ',', w).find("not a finite number"), std::string::npos);
  EXPECT_NE(extract_delimited(fields, "1.5,2,maybe", ',', w).find("boolean"), std::string::npos);
}

TEST(Quantities, JsonKeysMapToQuantitiesAndTheInstrumentTimeIsUsed) {
  const std::vector<FieldMap> fields = {{0, "T", "temperature_k", 1e-3}, {0, "ts", "time_s", 1.0}};
  QuantityValues v;
  ASSERT_EQ(extract_json(fields, R"({"T": 25.0, "ts": 1700000000.5, "other": "x"})", v), "");
  const auto r = make_reading(SourceKind::thermometer, v, 42.0);
  ASSERT_TRUE(r);
  const auto& t = std::get<protocol::ThermometerReading>(*r);
  EXPECT_DOUBLE_EQ(t.temperature_k, 0.025);
  EXPECT_EQ(t.t, 1700000000.5);  // the instrument's time, not the arrival time 42
  QuantityValues w;
  EXPECT_EQ(extract_json(fields, "[1,2]", w), "not a JSON object");
  EXPECT_EQ(extract_json(fields, "{\"T\": 1", w), "not valid JSON");
  EXPECT_NE(extract_json(fields, R"({"T": "warm", "ts": 1})", w).find("unusable"), std::string::npos);
  EXPECT_NE(extract_json(fields, R"({"ts": 1})", w).find("'T' missing"), std::string::npos);
  // Without time_s the arrival time is the reading's time.
  QuantityValues u;
  u[Quantity::field_t] = 0.5;
  EXPECT_EQ(std::get<protocol::FieldReading>(*make_reading(SourceKind::field, u, 42.0)).t, 42.0);
  EXPECT_FALSE(make_reading(SourceKind::lockin, u, 42.0));  // no x_v, y_v
}

TEST(Backoff, GrowsGeometricallyWithinTheJitterBandAndNeverAboveTheMaximum) {
  BackoffOptions o;
  o.min_delay = std::chrono::milliseconds(100);
  o.max_delay = std::chrono::milliseconds(1000);
  o.factor = 2.0;
  o.jitter = 0.25;
  Backoff b(o, 7);
  // d_n = min(1000, 100 * 2^(n-1)); each delay lies in [(1 - 0.25) d_n, d_n]
  // (rounded to whole milliseconds, hence the 1 ms allowance).
  const double expected_full[] = {100, 200, 400, 800, 1000, 1000, 1000};
  for (const double full : expected_full) {
    const double d = static_cast<double>(b.next_delay().count());
    EXPECT_GE(d, 0.75 * full - 1.0);
    EXPECT_LE(d, full);
  }
  b.succeeded();
  EXPECT_LE(b.next_delay().count(), 100);
  // The same seed gives the same sequence; another seed another one.
  Backoff x(o, 99), y(o, 99), z(o, 100);
  bool differs = false;
  for (int i = 0; i < 8; ++i) {
    const auto dx = x.next_delay();
    EXPECT_EQ(dx, y.next_delay());
    differs = differs || dx != z.next_delay();
  }
  EXPECT_TRUE(differs);
  // FNV-1a test vector: the 64-bit hash of "a" is 0xaf63dc4c8601ec8c
  // (the reference test suite published with FNV).
  EXPECT_EQ(seed_from_name("a"), 0xaf63dc4c8601ec8cULL);
}

LockinReading lockin(double x) {
  LockinReading r;
  r.x_v = x;
  r.y_v = 0.0;
  return r;
}

TEST(ReadingOutlet, NumbersFromTheFirstSeqAndKeepsRefusedReadingsForLater) {
  std::vector<LockinReading> got;
  bool accept = false;
  OutletOptions o;
  o.first_seq = 41;
  o.max_buffered_readings = 3;
  o.max_batch_readings = 2;
  ReadingOutlet out(SourceKind::lockin, o, [&](protocol::Readings&& batch) {
    if (!accept) {
      // A refusing sink may even take the batch: the outlet only gave a copy.
      protocol::Readings taken = std::move(batch);
      return false;
    }
    auto& v = std::get<std::vector<LockinReading>>(batch);
    EXPECT_LE(v.size(), 2u);
    got.insert(got.end(), v.begin(), v.end());
    return true;
  });
  EXPECT_TRUE(out.push(lockin(1)));
  EXPECT_TRUE(out.push(lockin(2)));
  EXPECT_TRUE(out.push(lockin(3)));
  EXPECT_EQ(out.buffered(), 3u);
  EXPECT_FALSE(out.push(lockin(4)));  // buffer full: dropped, seq 44 used
  EXPECT_EQ(out.dropped(), 1u);
  accept = true;
  EXPECT_TRUE(out.push(lockin(5)));
  ASSERT_EQ(got.size(), 4u);
  const std::int64_t seqs[] = {41, 42, 43, 45};  // 44 is the recorded gap
  const double xs[] = {1, 2, 3, 5};
  for (std::size_t i = 0; i < 4; ++i) {
    EXPECT_EQ(got[i].seq, seqs[i]);
    EXPECT_EQ(got[i].x_v, xs[i]);
  }
  EXPECT_EQ(out.next_seq(), 46);
  EXPECT_EQ(out.delivered(), 4u);
  EXPECT_EQ(out.buffered(), 0u);
}

ScpiTcpConfig good_scpi() {
  ScpiTcpConfig c;
  c.source = "lockin1";
  c.kind = SourceKind::lockin;
  c.connection.port = 5025;
  c.queries = {{"SNAP? 1,2", {{0, "", "x_v", 1.0}, {1, "", "y_v", 1.0}}}};
  return c;
}

TEST(Config, ValidateNamesTheWrongField) {
  EXPECT_EQ(validate(good_scpi()), "");
  auto c = good_scpi();
  c.queries[0].fields[1].quantity = "temperature_k";
  EXPECT_NE(validate(c).find("'temperature_k' does not belong to a lockin"), std::string::npos) << validate(c);
  c = good_scpi();
  c.queries[0].fields.pop_back();
  EXPECT_NE(validate(c).find("'y_v'"), std::string::npos) << validate(c);
  c = good_scpi();
  c.queries.push_back({"X?", {{0, "", "x_v", 1.0}}});
  EXPECT_NE(validate(c).find("mapped twice"), std::string::npos) << validate(c);
  c = good_scpi();
  c.queries[0].send = "SNAP?\n";
  EXPECT_NE(validate(c).find("line break"), std::string::npos);
  c = good_scpi();
  c.connection.port = 0;
  EXPECT_NE(validate(c).find("connection.port"), std::string::npos);
  c = good_scpi();
  c.backoff.max_delay = std::chrono::milliseconds(1);
  EXPECT_NE(validate(c).find("backoff.max_delay"), std::string::npos);
  c = good_scpi();
  c.queries[0].fields[0].scale = 0.0;
  EXPECT_NE(validate(c).find("scale"), std::string::npos);
  c = good_scpi();
  c.queries[0].fields[0].quantity = "xv";
  EXPECT_NE(validate(c).find("unknown quantity 'xv'"), std::string::npos);

  LineStreamConfig l;
  l.source = "gw";
  l.kind = SourceKind::field;
  l.mode = LineStreamConfig::Mode::listen;  // port 0 allowed: any free port
  l.format = LineStreamConfig::Format::json;
  l.fields = {{0, "", "field_t", 1.0}};
  EXPECT_NE(validate(l).find("needs a key"), std::string::npos) << validate(l);
  l.fields[0].key = "B";
  EXPECT_EQ(validate(l), "");
}

}  // namespace
}  // namespace lphi::drivers
