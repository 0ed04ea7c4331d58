// Aligner: linear interpolation in time, the max-age rule, arrival-order
// independence, bounded buffers and refused input.
//
// The reference for the stream tests is a direct, brute-force restatement of the rule in
// analysis/alignment.hpp (for each lock-in reading, search all thermometer and
// field readings for its neighbours), written here without the aligner's
// buffering, so the incremental version is checked against the definition.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>
#include <random>
#include <variant>
#include <type_traits>
#include <vector>

#include "analysis/alignment.hpp"

namespace {

using lphi::align::AlignedPoint;
using lphi::align::Aligner;
using lphi::align::AlignerOptions;
using lphi::align::FieldReading;
using lphi::align::LockinReading;
using lphi::align::TemperatureReading;

// ---- worked examples -----------------------------------------------------

TEST(Alignment, InterpolatesLinearlyBetweenNeighbours) {
  // Worked by hand: T goes 100 mK -> 200 mK from t = 0 to 10 s, B goes
  // 0 -> 0.4 T from t = 0 to 4 s. At t = 2.5 s: T = 0.1 + 0.1 * 2.5/10 =
  // 0.125 K, B = 0.4 * 2.5/4 = 0.25 T. Tolerance: a few ulps of rounding.
  // Field readings 4 s apart need a max age of at least 2.5 s here.
  AlignerOptions o;
  o.max_age_field_s = 3.0;
  Aligner a(o);
  std::vector<AlignedPoint> out;
  a.push(TemperatureReading{0.0, 0.100}, out);
  a.push(FieldReading{0.0, 0.0}, out);
  a.push(LockinReading{2.5, 1e-6, 2e-8, 1e-5, 0.1, false}, out);
  EXPECT_TRUE(out.empty()) << "held until both streams pass t = 2.5 s";
  a.push(FieldReading{4.0, 0.4}, out);
  EXPECT_TRUE(out.empty()) << "the thermometer has not passed t = 2.5 s yet";
  a.push(TemperatureReading{10.0, 0.200}, out);
  ASSERT_EQ(out.size(), 1u);
  EXPECT_NEAR(out[0].temperature_k, 0.125, 1e-15);
  EXPECT_NEAR(out[0].field_t, 0.25, 1e-15);
  EXPECT_EQ(out[0].t_s, 2.5);
  EXPECT_EQ(out[0].x_v, 1e-6);
  EXPECT_EQ(out[0].y_v, 2e-8);
  EXPECT_EQ(out[0].range_v, 1e-5);
  EXPECT_EQ(out[0].time_constant_s, 0.1);
  EXPECT_FALSE(out[0].temperature_exact);
  EXPECT_FALSE(out[0].field_exact);
  EXPECT_EQ(a.counts().aligned, 1u);
}

TEST(Alignment, ReadingAtTheSameTimeIsUsedExactly) {
  // A thermometer reading at exactly the lock-in time needs no neighbour
  // after it: it is final as soon as it arrives.
  Aligner a;
  std::vector<AlignedPoint> out;
  a.push(LockinReading{5.0, 1e-6, 0.0, 0.0, 0.0, true}, out);
  a.push(TemperatureReading{5.0, 0.05}, out);
  a.push(FieldReading{3.0, -0.1}, out);
  EXPECT_TRUE(out.empty());
  a.push(FieldReading{5.0, 0.1}, out);
  ASSERT_EQ(out.size(), 1u);
  EXPECT_EQ(out[0].temperature_k, 0.05);
  EXPECT_EQ(out[0].field_t, 0.1);
  EXPECT_TRUE(out[0].temperature_exact);
  EXPECT_TRUE(out[0].field_exact);
  EXPECT_TRUE(out[0].overload);
}

TEST(Alignment, MaxAgeOnBothSidesAndNoExtrapolation) {
  // max_age_temperature = 30 s. Thermometer readings at 0, 40 and 100 s.
  //  t = 20: ages 20 and 20  -> used, T = 1 + 0.5 * 20/40 = 1.25 K
  //  t = 35: age 35 before   -> missing temperature
  //  t = 45: ages 5 and 55   -> missing temperature (after is too old)
  //  t = -1: nothing before  -> missing (no extrapolation)
  //  t = 101: nothing after  -> missing at flush (no extrapolation)
  AlignerOptions o;
  o.max_age_temperature_s = 30.0;
  o.max_age_field_s = 30.0;
  o.max_hold_s = 1e3;  // all lock-in readings arrive first; none may be forced
  // The field is read every second, so only the temperature rule bites.
  std::vector<AlignedPoint> out;
  Aligner b(o);
  for (double t : {-1.0, 20.0, 35.0, 45.0, 101.0}) b.push(LockinReading{t, 1e-6}, out);
  for (int i = -2; i <= 110; ++i) b.push(FieldReading{static_cast<double>(i), 0.01 * i}, out);
  b.push(TemperatureReading{0.0, 1.0}, out);
  b.push(TemperatureReading{40.0, 1.5}, out);
  b.push(TemperatureReading{100.0, 2.0}, out);
  b.flush(out);
  ASSERT_EQ(out.size(), 1u);
  EXPECT_EQ(out[0].t_s, 20.0);
  EXPECT_NEAR(out[0].temperature_k, 1.25, 1e-15);
  EXPECT_NEAR(out[0].field_t, 0.20, 1e-15);
  EXPECT_EQ(b.counts().missing_temperature, 4u);
  EXPECT_EQ(b.counts().missing_field, 0u);
  EXPECT_EQ(b.counts().unused, 4u);
  EXPECT_EQ(b.counts().lockin_received, 5u);
}

// ---- streams: reference, shuffled arrival --------------------------------

struct Streams {
  std::vector<LockinReading> lockin;
  std::vector<TemperatureReading> temperature;
  std::vector<FieldReading> field;
};

double uniform(std::mt19937_64& g) { return static_cast<double>(g() >> 11) * 0x1.0p-53; }

// 20 Hz lock-in over 300 s; thermometer every ~7 s with an 84 s gap (98 ->
// 182 s) that no reading can bridge at max age 30 s; field every ~0.5 s
// with a 6 s gap (240 -> 246 s) at the automatic max age (about 2.5 s).
// Times jittered so that the streams never share a grid.
Streams make_streams(std::uint64_t seed) {
  std::mt19937_64 g(seed);
  Streams s;
  for (int i = 0; i < 6000; ++i) {
    const double t = 0.05 * i + 0.01 * uniform(g);
    s.lockin.push_back({t, 1e-6 * (1.0 + 0.1 * std::sin(t)), 1e-8, 1e-5, 0.1, false});
  }
  for (double t = 0.5; t < 305.0; t += 6.0 + 2.0 * uniform(g)) {
    if (t > 98.0 && t < 182.0) continue;
    s.temperature.push_back({t, 0.02 + 0.001 * t});
  }
  for (double t = 0.2; t < 305.0; t += 0.4 + 0.2 * uniform(g)) {
    if (t > 240.0 && t < 246.0) continue;
    s.field.push_back({t, 0.5 * std::sin(0.05 * t)});
  }
  return s;
}

// The automatic field age limit for times before field reading b, from its
// definition (alignment.hpp, "Field age"): 5 times the median of the last 64
// intervals up to reading b (the upper middle one for an even count),
// clamped to [2 s, 30 s].
double automatic_field_age_s(const std::vector<FieldReading>& rs, std::size_t b) {
  std::vector<double> intervals;
  for (std::size_t i = b >= 64 ? b - 63 : 1; i <= b; ++i) intervals.push_back(rs[i].t_s - rs[i - 1].t_s);
  std::sort(intervals.begin(), intervals.end());
  return std::clamp(5.0 * intervals[intervals.size() / 2], 2.0, 30.0);
}

// The definition, searched directly. max_age < 0: the automatic field age.
template <class R>
bool neighbour_value(const std::vector<R>& rs, double t, double max_age, double R::*value,
                     double& v) {
  auto after = std::upper_bound(rs.begin(), rs.end(), t,
                                [](double x, const R& r) { return x < r.t_s; });
  if constexpr (std::is_same_v<R, FieldReading>) {
    if (max_age < 0.0 && after != rs.end() && after != rs.begin())
      max_age = automatic_field_age_s(rs, static_cast<std::size_t>(after - rs.begin()));
  }
  if (after == rs.begin()) return false;
  const R& a = *(after - 1);
  if (a.t_s == t) {
    v = a.*value;
    return true;
  }
  if (after == rs.end()) return false;
  const R& b = *after;
  if (t - a.t_s > max_age || b.t_s - t > max_age) return false;
  v = a.*value + (b.*value - a.*value) * (t - a.t_s) / (b.t_s - a.t_s);
  return true;
}

std::vector<AlignedPoint> reference(const Streams& s, const AlignerOptions& o) {
  std::vector<AlignedPoint> out;
  for (const auto& r : s.lockin) {
    double temperature = 0, field = 0;
    if (!neighbour_value(s.temperature, r.t_s, o.max_age_temperature_s,
                         &TemperatureReading::temperature_k, temperature))
      continue;
    if (!neighbour_value(s.field, r.t_s, o.max_age_field_s.value_or(-1.0), &FieldReading::field_t, field))
      continue;
    AlignedPoint p;
    p.t_s = r.t_s;
    p.temperature_k = temperature;
    p.field_t = field;
    out.push_back(p);
  }
  return out;
}

using Event = std::variant<LockinReading, TemperatureReading, FieldReading>;

// Arrival order: each stream delayed by a random, non-decreasing lag of up
// to max_lag_s of event time (so each stream stays in order), then merged.
std::vector<Event> arrival_order(const Streams& s, double max_lag_s, std::uint64_t seed) {
  std::mt19937_64 g(seed);
  struct Keyed {
    double key;
    int stream;
    std::size_t i;
  };
  std::vector<Keyed> keyed;
  auto add = [&](const auto& rs, int stream) {
    double last = -std::numeric_limits<double>::infinity();
    for (std::size_t i = 0; i < rs.size(); ++i) {
      last = std::max(last, rs[i].t_s + max_lag_s * uniform(g));
      keyed.push_back({last, stream, i});
    }
  };
  add(s.lockin, 0);
  add(s.temperature, 1);
  add(s.field, 2);
  std::stable_sort(keyed.begin(), keyed.end(),
                   [](const Keyed& a, const Keyed& b) { return a.key < b.key; });
  std::vector<Event> events;
  for (const auto& k : keyed) {
    if (k.stream == 0) events.emplace_back(s.lockin[k.i]);
    if (k.stream == 1) events.emplace_back(s.temperature[k.i]);
    if (k.stream == 2) events.emplace_back(s.field[k.i]);
  }
  return events;
}

std::vector<AlignedPoint> run(const std::vector<Event>& events, const AlignerOptions& o,
                              lphi::align::AlignmentCounts* counts = nullptr,
                              std::size_t* max_pending = nullptr) {
  Aligner a(o);
  std::vector<AlignedPoint> out;
  std::size_t most = 0;
  for (const auto& e : events) {
    std::visit([&](const auto& r) { a.push(r, out); }, e);
    most = std::max(most, a.pending());
  }
  a.flush(out);
  if (counts) *counts = a.counts();
  if (max_pending) *max_pending = most;
  return out;
}

void expect_same_points(const std::vector<AlignedPoint>& got,
                        const std::vector<AlignedPoint>& want) {
  ASSERT_EQ(got.size(), want.size());
  for (std::size_t i = 0; i < got.size(); ++i) {
    ASSERT_EQ(got[i].t_s, want[i].t_s) << i;
    // Same formula, same operands: identical to the last bit.
    ASSERT_EQ(got[i].temperature_k, want[i].temperature_k) << i;
    ASSERT_EQ(got[i].field_t, want[i].field_t) << i;
  }
}

TEST(Alignment, MatchesTheDefinitionInTimeOrder) {
  const Streams s = make_streams(7);
  AlignerOptions o;
  lphi::align::AlignmentCounts c;
  const auto got = run(arrival_order(s, 0.0, 1), o, &c);
  const auto want = reference(s, o);
  expect_same_points(got, want);
  // The gaps: 98..182 s without temperature loses (at least) the 84 s
  // between the readings less the 30 s max age on either side (a reading
  // needs both sides within 30 s, so all of the gap is lost): about 1680
  // readings; the 6 s field gap at max age 2 s loses about 6 s * 20 Hz = 120.
  EXPECT_GT(c.missing_temperature, 1600u);
  EXPECT_LT(c.missing_temperature, 1900u);
  EXPECT_GT(c.missing_field, 100u);
  EXPECT_LT(c.missing_field, 200u);
  EXPECT_EQ(c.aligned + c.unused, s.lockin.size());
  EXPECT_EQ(c.aligned, want.size());
  // The 84 s thermometer gap is longer than the 60 s hold: readings in it are
  // decided by the hold (as missing, which they are by definition as well).
  EXPECT_GT(c.decided_by_hold, 0u);
}

TEST(Alignment, ShuffledArrivalGivesTheSameOutput) {
  // Lags of up to 20 s of event time between the streams, below the 30 s
  // the header allows (hold 60 s less the 30 s max age): the output must not
  // depend on the interleaving. Only decided_by_hold, which records how
  // readings were decided, may differ.
  const Streams s = make_streams(11);
  AlignerOptions o;
  const auto want = reference(s, o);
  lphi::align::AlignmentCounts first;
  for (std::uint64_t seed = 1; seed <= 5; ++seed) {
    lphi::align::AlignmentCounts c;
    const auto got = run(arrival_order(s, 20.0, seed), o, &c);
    expect_same_points(got, want);
    c.decided_by_hold = 0;
    if (seed == 1) first = c;
    EXPECT_EQ(c, first) << "counts depend on arrival order, seed " << seed;
  }
}

TEST(Alignment, WholeStreamLateWithinTheHold) {
  // The thermometer's whole recording arrives after everything else: with
  // hold and capacity large enough the output is still the definition's.
  const Streams s = make_streams(3);
  AlignerOptions o;
  o.max_hold_s = 1e9;
  std::vector<Event> events;
  for (const auto& r : s.lockin) events.emplace_back(r);
  for (const auto& r : s.field) events.emplace_back(r);
  for (const auto& r : s.temperature) events.emplace_back(r);
  std::size_t most = 0;
  const auto got = run(events, o, nullptr, &most);
  expect_same_points(got, reference(s, o));
  EXPECT_EQ(most, s.lockin.size()) << "all lock-in readings held until the thermometer arrives";
}

TEST(Alignment, SilentThermometerIsDecidedByTheHold) {
  // No thermometer at all: each lock-in reading waits max_hold_s = 10 s of
  // lock-in event time, then is decided as missing. At 20 Hz at most
  // 10 s * 20 Hz + 1 = 201 readings are ever held.
  AlignerOptions o;
  o.max_hold_s = 10.0;
  o.max_age_temperature_s = 5.0;
  Aligner a(o);
  std::vector<AlignedPoint> out;
  std::size_t most = 0;
  for (int i = 0; i < 2000; ++i) {
    const double t = 0.05 * i;
    a.push(FieldReading{t + 0.001, 0.0}, out);
    a.push(LockinReading{t, 1e-6}, out);
    most = std::max(most, a.pending());
  }
  EXPECT_TRUE(out.empty());
  EXPECT_LE(most, 201u);
  EXPECT_GE(most, 199u);
  const std::size_t held = a.pending();
  EXPECT_EQ(a.counts().decided_by_hold, 2000u - held);
  EXPECT_EQ(a.counts().missing_temperature, 2000u - held);
  a.flush(out);
  EXPECT_EQ(a.pending(), 0u);
  EXPECT_EQ(a.counts().missing_temperature, 2000u);
  EXPECT_LE(a.buffered_field(), 2u) << "field readings no lock-in reading can need are let go";
}

TEST(Alignment, CapacityBoundsThePendingReadings) {
  AlignerOptions o;
  o.max_pending = 10;
  o.max_hold_s = 1e9;
  Aligner a(o);
  std::vector<AlignedPoint> out;
  for (int i = 0; i < 100; ++i) {
    a.push(LockinReading{0.05 * i, 1e-6}, out);
    EXPECT_LE(a.pending(), 10u);
  }
  EXPECT_EQ(a.counts().decided_by_capacity, 90u);
  EXPECT_EQ(a.counts().unused, 90u);
}

TEST(Alignment, BufferedReadingsStayBoundedAndAreDroppedAtTheLimit) {
  // Keeping pace: only the readings around the held lock-in readings stay.
  // The thermometer reports once a second, so up to 20 lock-in readings wait
  // for it and the field readings of that second (every 0.1 s: 10) with them.
  Aligner a;
  std::vector<AlignedPoint> out;
  std::size_t most_t = 0, most_b = 0;
  for (int i = 0; i < 20000; ++i) {
    const double t = 0.05 * i;
    a.push(LockinReading{t, 1e-6}, out);
    if (i % 20 == 0) a.push(TemperatureReading{t + 0.01, 0.1}, out);
    if (i % 2 == 0) a.push(FieldReading{t + 0.01, 0.0}, out);
    most_t = std::max(most_t, a.buffered_temperature());
    most_b = std::max(most_b, a.buffered_field());
  }
  EXPECT_LE(most_t, 3u);
  EXPECT_LE(most_b, 12u);
  EXPECT_GT(out.size(), 19900u);

  // Lock-in silent, thermometer running on: the buffer stops at its limit.
  AlignerOptions o;
  o.max_buffered = 50;
  Aligner b(o);
  b.push(LockinReading{0.0, 1e-6}, out);
  for (int i = 1; i <= 200; ++i) b.push(TemperatureReading{static_cast<double>(i), 0.1}, out);
  EXPECT_EQ(b.buffered_temperature(), 50u);
  EXPECT_EQ(b.counts().dropped_temperature, 150u);
}

TEST(Alignment, RefusesBadReadingsAndCountsThem) {
  Aligner a;
  std::vector<AlignedPoint> out;
  const double nan = std::numeric_limits<double>::quiet_NaN();
  a.push(LockinReading{nan, 1e-6}, out);
  a.push(LockinReading{1.0, nan}, out);
  a.push(LockinReading{1.0, 1e-6, 0.0, -1.0}, out);  // negative range
  a.push(TemperatureReading{1.0, 0.0}, out);         // T <= 0
  a.push(TemperatureReading{1.0, nan}, out);
  a.push(FieldReading{1.0, std::numeric_limits<double>::infinity()}, out);
  EXPECT_EQ(a.counts().refused_lockin, 3u);
  EXPECT_EQ(a.counts().refused_temperature, 2u);
  EXPECT_EQ(a.counts().refused_field, 1u);

  a.push(LockinReading{2.0, 1e-6}, out);
  a.push(LockinReading{1.5, 1e-6}, out);  // earlier than its predecessor
  a.push(LockinReading{2.0, 1e-6}, out);  // equal time: allowed for the lock-in
  a.push(TemperatureReading{3.0, 0.1}, out);
  a.push(TemperatureReading{3.0, 0.1}, out);  // repeated time: refused
  a.push(FieldReading{3.0, 0.1}, out);
  a.push(FieldReading{2.0, 0.1}, out);
  EXPECT_EQ(a.counts().out_of_order_lockin, 1u);
  EXPECT_EQ(a.counts().out_of_order_temperature, 1u);
  EXPECT_EQ(a.counts().out_of_order_field, 1u);
  EXPECT_EQ(a.counts().lockin_received, 6u);
}

TEST(Alignment, InvalidOptionsRefuseEverything) {
  AlignerOptions o;
  o.max_age_field_s = -1.0;
  EXPECT_NE(lphi::align::validate(o).find("max_age_field_s"), std::string::npos);
  Aligner a(o);
  EXPECT_FALSE(a.error().empty());
  std::vector<AlignedPoint> out;
  a.push(TemperatureReading{0.0, 0.1}, out);
  a.push(FieldReading{0.0, 0.1}, out);
  a.push(LockinReading{0.0, 1e-6}, out);
  a.flush(out);
  EXPECT_TRUE(out.empty());
  EXPECT_EQ(a.counts().refused_lockin, 1u);
  EXPECT_EQ(a.counts().refused_temperature, 1u);
  EXPECT_EQ(a.counts().refused_field, 1u);
  o = AlignerOptions{};
  o.max_pending = 0;
  EXPECT_NE(lphi::align::validate(o).find("max_pending"), std::string::npos);
  EXPECT_TRUE(lphi::align::validate(AlignerOptions{}).empty());
}

}  // namespace
