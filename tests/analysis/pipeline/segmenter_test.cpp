// PlateauDetector and SweepSegmenter on synthetic cooldowns: counts of
// plateaus and sweeps, directions, a sweep straddling a temperature step,
// settling exclusions counted by hand, chunking invariance, bounded memory.
//
// The cooldown: plateaus at 1 K, 500, 200, 100 and 50 mK; at each, the
// magnet dwells at -0.1 T, ramps to +0.1 T, dwells, ramps back (the usual
// up/down pair per temperature, common practice). Readings at 25 Hz, lock-in
// time constant 0.3 s. Thermometer noise 2e-4 relative and field noise 1e-5 T
// (Gaussian, lphi::synthetic::NormalSource), far below the criteria used
// (2% spread; 1 mT reversal tolerance).
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

#include "analysis/segmenter.hpp"
#include "analysis/synthetic.hpp"

namespace {

using lphi::align::AlignedPoint;
using lphi::segment::Direction;
using lphi::segment::Plateau;
using lphi::segment::PlateauDetector;
using lphi::segment::PlateauOptions;
using lphi::segment::SegmenterOptions;
using lphi::segment::SegmentOutput;
using lphi::segment::SweepSegmenter;

constexpr double kDt = 0.04;   // s, 25 Hz
constexpr double kTau = 0.3;   // s; settling 5 tau = 1.5 s
constexpr double kBmax = 0.1;  // T

struct Cooldown {
  std::vector<double> temperatures_k = {1.0, 0.5, 0.2, 0.1, 0.05};
  double dwell_s = 20.0;
  double ramp_s = 120.0;
  double t_noise_rel = 2e-4;
  double b_noise_t = 1e-5;
  // Optional extra temperature step inside one ramp: plateau index, and the
  // factor applied from the middle of its up ramp on.
  int step_plateau = -1;
  double step_factor = 1.0;
  std::uint64_t seed = 5;
};

std::vector<AlignedPoint> make_cooldown(const Cooldown& c) {
  lphi::synthetic::NormalSource noise(c.seed);
  std::vector<AlignedPoint> out;
  const double cycle = 2.0 * (c.dwell_s + c.ramp_s);
  const auto n_per = static_cast<std::size_t>(std::llround(cycle / kDt));
  std::size_t i = 0;
  for (std::size_t k = 0; k < c.temperatures_k.size(); ++k) {
    for (std::size_t j = 0; j < n_per; ++j, ++i) {
      const double t = static_cast<double>(i) * kDt;
      const double u = static_cast<double>(j) * kDt;  // time within the cycle
      double b;
      if (u < c.dwell_s)
        b = -kBmax;
      else if (u < c.dwell_s + c.ramp_s)
        b = -kBmax + 2.0 * kBmax * (u - c.dwell_s) / c.ramp_s;
      else if (u < 2.0 * c.dwell_s + c.ramp_s)
        b = kBmax;
      else
        b = kBmax - 2.0 * kBmax * (u - 2.0 * c.dwell_s - c.ramp_s) / c.ramp_s;
      double temperature = c.temperatures_k[k];
      if (static_cast<int>(k) == c.step_plateau && u >= c.dwell_s + c.ramp_s / 2.0)
        temperature *= c.step_factor;
      AlignedPoint p;
      p.t_s = t;
      p.x_v = 1e-6;
      p.temperature_k = temperature * (1.0 + c.t_noise_rel * noise.next());
      p.field_t = b + c.b_noise_t * noise.next();
      p.range_v = 1e-5;
      p.time_constant_s = kTau;
      out.push_back(p);
    }
  }
  return out;
}

SegmenterOptions cooldown_options() {
  SegmenterOptions o;
  o.plateau.relative_spread = 0.02;
  o.plateau.min_duration_s = 200.0;
  o.min_span_t = 0.1;
  o.reversal_tolerance_t = 1e-3;
  return o;
}

SegmentOutput segment(const std::vector<AlignedPoint>& points, const SegmenterOptions& o,
                      std::size_t chunk, lphi::segment::SegmentCounts* counts = nullptr) {
  SweepSegmenter s(o);
  SegmentOutput out;
  for (std::size_t i = 0; i < points.size(); i += chunk) {
    const std::size_t n = std::min(chunk, points.size() - i);
    s.push(std::span<const AlignedPoint>(points).subspan(i, n), out);
  }
  s.finish(out);
  if (counts) *counts = s.counts();
  return out;
}

// ---- PlateauDetector -------------------------------------------------------

TEST(PlateauDetector, StatisticsOfAWorkedExample) {
  // Five readings 100 s apart, then a 20% jump ends the run. Mean, sample
  // standard deviation, min and max worked by the two-pass formulas here.
  const std::vector<double> temps = {0.100, 0.101, 0.099, 0.100, 0.102};
  double mean = 0;
  for (double t : temps) mean += t;
  mean /= 5.0;
  double ss = 0;
  for (double t : temps) ss += (t - mean) * (t - mean);
  const double sd = std::sqrt(ss / 4.0);

  PlateauOptions o;
  o.relative_spread = 0.05;
  o.min_duration_s = 300.0;
  PlateauDetector d(o);
  std::vector<Plateau> out;
  for (std::size_t i = 0; i < temps.size(); ++i)
    EXPECT_FALSE(d.push(100.0 * static_cast<double>(i), temps[i], out));
  EXPECT_TRUE(out.empty());
  EXPECT_TRUE(d.push(500.0, 0.120, out)) << "a 20% jump is a temperature change";
  ASSERT_EQ(out.size(), 1u);
  EXPECT_EQ(out[0].run, 0u);
  EXPECT_EQ(out[0].t_start_s, 0.0);
  EXPECT_EQ(out[0].t_end_s, 400.0);
  EXPECT_EQ(out[0].temperature.n, 5u);
  EXPECT_NEAR(out[0].temperature.mean_k, mean, 1e-15);
  EXPECT_NEAR(out[0].temperature.std_k, sd, 1e-15);
  EXPECT_EQ(out[0].temperature.min_k, 0.099);
  EXPECT_EQ(out[0].temperature.max_k, 0.102);
  EXPECT_EQ(d.run(), 1u);
  // The new run lasts 0 s: below min_duration, so finish() reports nothing.
  d.finish(out);
  EXPECT_EQ(out.size(), 1u);
}

TEST(PlateauDetector, SpreadCriterionIsInclusiveAndShortRunsAreNotPlateaus) {
  // relative_spread 0.1: 1.0 and 1.1 have (max - min)/mean = 0.1/1.05 < 0.1,
  // in one run; 1.0 and 1.12 have 0.12/1.06 = 0.113 > 0.1, a change.
  PlateauOptions o;
  o.relative_spread = 0.1;
  o.min_duration_s = 10.0;
  PlateauDetector d(o);
  std::vector<Plateau> out;
  EXPECT_FALSE(d.push(0.0, 1.0, out));
  EXPECT_FALSE(d.push(1.0, 1.1, out));
  EXPECT_TRUE(d.push(2.0, 1.22, out));  // 1.0 .. 1.22: 0.22/1.107 > 0.1
  EXPECT_TRUE(out.empty()) << "a 1 s run is shorter than min_duration";
}

TEST(PlateauDetector, SlowRampHasNoPlateau) {
  // T rising 1% per minute with a 2% criterion: each run lasts about two
  // minutes, below the 5 min minimum. 2 h of readings at 1 Hz.
  PlateauOptions o;
  o.relative_spread = 0.02;
  o.min_duration_s = 300.0;
  PlateauDetector d(o);
  std::vector<Plateau> out;
  for (int i = 0; i < 7200; ++i) d.push(i, 0.1 * std::pow(1.01, i / 60.0), out);
  d.finish(out);
  EXPECT_TRUE(out.empty());
  EXPECT_GT(d.run(), 50u);  // 2 h / ~2 min
}

// ---- SweepSegmenter on a cooldown -------------------------------------------

TEST(SweepSegmenter, CooldownGivesOneUpAndOneDownSweepPerPlateau) {
  const Cooldown c;
  const auto points = make_cooldown(c);
  lphi::segment::SegmentCounts counts;
  const auto out = segment(points, cooldown_options(), 1000, &counts);

  ASSERT_EQ(out.plateaus.size(), 5u);
  for (std::size_t k = 0; k < 5; ++k) {
    const auto& p = out.plateaus[k];
    // Each plateau lasts its 280 s cycle (less one reading); the mean is the
    // set temperature within 5 standard errors of the 2e-4 relative noise.
    EXPECT_NEAR(p.t_end_s - p.t_start_s, 280.0, 0.1);
    const double se = c.t_noise_rel * c.temperatures_k[k] / std::sqrt(double(p.temperature.n));
    EXPECT_NEAR(p.temperature.mean_k, c.temperatures_k[k], 5.0 * se);
    EXPECT_NEAR(p.temperature.std_k / c.temperatures_k[k], c.t_noise_rel, 0.1 * c.t_noise_rel);
  }

  ASSERT_EQ(out.sweeps.size(), 10u);
  for (std::size_t i = 0; i < out.sweeps.size(); ++i) {
    const auto& s = out.sweeps[i];
    SCOPED_TRACE(i);
    EXPECT_EQ(s.index, i);
    EXPECT_EQ(s.direction, i % 2 == 0 ? Direction::up : Direction::down);
    EXPECT_FALSE(s.temperature_unstable);
    EXPECT_FALSE(s.truncated);
    EXPECT_LE(s.field_min_t, -0.05);
    EXPECT_GE(s.field_max_t, 0.05);
    // The dwell is trimmed: each sweep is its 120 s ramp, give or take the
    // time the ramp takes to cross the 1 mT tolerance (0.6 s) at each end.
    // A turn's 1.5 s settling window starts at the noisy extreme inside the
    // dwell and may reach into the ramp: up to 1.5 s more.
    EXPECT_NEAR(s.t_end_s - s.t_start_s, 120.0, 2.5);
    const double truth = c.temperatures_k[i / 2];
    EXPECT_NEAR(s.temperature.mean_k, truth,
                5.0 * c.t_noise_rel * truth / std::sqrt(double(s.temperature.n)));
    EXPECT_EQ(s.points.size(), s.temperature.n);
    EXPECT_EQ(s.points.front().t_s, s.t_start_s);
    EXPECT_EQ(s.points.back().t_s, s.t_end_s);
    // Monotonic within the tolerance.
    for (std::size_t j = 1; j < s.points.size(); ++j) {
      const double step = s.points[j].field_t - s.points[j - 1].field_t;
      ASSERT_GT(s.direction == Direction::up ? step : -step, -2e-3);
    }
  }
  EXPECT_EQ(counts.sweeps, 10u);
  EXPECT_EQ(counts.sweeps_temperature_unstable, 0u);
  EXPECT_EQ(counts.plateaus, 5u);
  // 4 temperature changes, each excluding the 38 readings in [0, 1.5) s
  // (t = 0, 0.04, ..., 1.48 s). Overlapping windows are counted under the
  // one ending last; with this seed no turn's window overlaps a change.
  EXPECT_EQ(counts.settling.temperature_change, 4u * 38u);
  EXPECT_GT(counts.settling.field_reversal, 0u);
  EXPECT_GT(counts.dwell_points, 0u);
  EXPECT_EQ(counts.refused, 0u);
}

TEST(SweepSegmenter, SweepStraddlingATemperatureStepIsMarked) {
  // Plateau 2 (200 mK) jumps to 230 mK in the middle of its up ramp.
  Cooldown c;
  c.step_plateau = 2;
  c.step_factor = 1.15;
  const auto out = segment(make_cooldown(c), cooldown_options(), 1000);
  ASSERT_EQ(out.sweeps.size(), 10u);
  for (std::size_t i = 0; i < out.sweeps.size(); ++i)
    EXPECT_EQ(out.sweeps[i].temperature_unstable, i == 4) << i;
  // The straddling sweep's statistics show the step: min near 200 mK,
  // max near 230 mK.
  EXPECT_NEAR(out.sweeps[4].temperature.min_k, 0.200, 0.001);
  EXPECT_NEAR(out.sweeps[4].temperature.max_k, 0.230, 0.001);
  // The down sweep that follows, all at 230 mK, is stable.
  EXPECT_FALSE(out.sweeps[5].temperature_unstable);
  EXPECT_NEAR(out.sweeps[5].temperature.mean_k, 0.230, 1e-4);
}

TEST(SweepSegmenter, ChunkingDoesNotChangeTheOutput) {
  Cooldown c;
  c.step_plateau = 3;
  c.step_factor = 0.9;
  const auto points = make_cooldown(c);
  lphi::segment::SegmentCounts c1, c7, c1000;
  const auto one = segment(points, cooldown_options(), 1, &c1);
  const auto seven = segment(points, cooldown_options(), 7, &c7);
  const auto thousand = segment(points, cooldown_options(), 1000, &c1000);
  ASSERT_FALSE(one.sweeps.empty());
  EXPECT_TRUE(one.sweeps == seven.sweeps);
  EXPECT_TRUE(one.sweeps == thousand.sweeps);
  EXPECT_TRUE(one.plateaus == seven.plateaus);
  EXPECT_TRUE(one.plateaus == thousand.plateaus);
  EXPECT_EQ(c1, c7);
  EXPECT_EQ(c1, c1000);
}

// ---- settling, counted by hand ---------------------------------------------

// Noise-free data are segmented with a tolerance of 0.05 mT, below every
// ramp's step per reading, so that only a true dwell is trimmed.
SegmenterOptions noise_free_options() {
  auto o = cooldown_options();
  o.reversal_tolerance_t = 5e-5;
  return o;
}

// A noise-free up ramp from -0.1 to +0.1 T over n readings at kDt.
std::vector<AlignedPoint> ramp(std::size_t n, double tau_s, double t0 = 0.0) {
  std::vector<AlignedPoint> v;
  for (std::size_t i = 0; i < n; ++i) {
    AlignedPoint p;
    p.t_s = t0 + static_cast<double>(i) * kDt;
    p.field_t = -kBmax + 2.0 * kBmax * static_cast<double>(i) / static_cast<double>(n - 1);
    p.temperature_k = 0.1;
    p.x_v = 1e-6;
    p.range_v = 1e-5;
    p.time_constant_s = tau_s;
    v.push_back(p);
  }
  return v;
}

TEST(SweepSegmenter, SettlingAfterATemperatureStep) {
  // T jumps from 100 to 120 mK at reading 1000 (t = 40 s). With tau = 0.3 s
  // the 5 tau = 1.5 s window holds the readings at 40.00, 40.04, ...,
  // 41.48 s: 38 readings (41.52 s is outside).
  auto v = ramp(2000, kTau);
  for (std::size_t i = 1000; i < v.size(); ++i) v[i].temperature_k = 0.12;
  lphi::segment::SegmentCounts counts;
  const auto out = segment(v, noise_free_options(), 1000, &counts);
  EXPECT_EQ(counts.settling.temperature_change, 38u);
  EXPECT_EQ(counts.settling.total(), 38u);
  ASSERT_EQ(out.sweeps.size(), 1u);
  EXPECT_EQ(out.sweeps[0].points.size(), 2000u - 38u);
  EXPECT_TRUE(out.sweeps[0].temperature_unstable);
}

// A plateau that settles slowly: T = 100 mK (1 + 0.03 exp(-t/60 s)), the
// last part of a cooling ramp, with the greedy run starting at t = 0. The
// run breaks when its spread passes 2 % of its mean (hand calculation:
// 103 mK - T(t) > 0.02 * ~102 mK when 0.03 exp(-t/60 s) < 0.0096, at
// t = 60 s * ln(3.125) = 68 s, inside the sweep over 40..120 s), yet the
// sweep's own temperatures, from 101.5 to 100.4 mK, spread by 1.1 % of
// their mean: within the criterion, so the sweep is
// stable and belongs to the run that goes on. A real step (the test above,
// 20 %) still marks its sweep unstable.
TEST(SweepSegmenter, SlowlySettlingPlateauIsNotATemperatureChange) {
  auto v = ramp(2000, kTau, 40.0);  // t = 40 .. 120 s
  for (auto& p : v) p.temperature_k = 0.1 * (1.0 + 0.03 * std::exp(-p.t_s / 60.0));
  // The tail of the ramp before the sweep, at zero field: the run starts
  // at t = 0.
  std::vector<AlignedPoint> all;
  for (int i = 0; i < 1000; ++i) {
    AlignedPoint p = v.front();
    p.t_s = 0.04 * i;
    p.field_t = -kBmax;
    p.temperature_k = 0.1 * (1.0 + 0.03 * std::exp(-p.t_s / 60.0));
    all.push_back(p);
  }
  all.insert(all.end(), v.begin(), v.end());
  lphi::segment::SegmentCounts counts;
  const auto out = segment(all, noise_free_options(), 1000, &counts);
  ASSERT_EQ(out.sweeps.size(), 1u);
  const auto& sw = out.sweeps[0];
  // The run did break inside the sweep (else this test shows nothing).
  EXPECT_GT(counts.settling.temperature_change, 0u);
  EXPECT_EQ(sw.temperature_run, 1u);
  EXPECT_LT(sw.temperature.max_k - sw.temperature.min_k, 0.02 * sw.temperature.mean_k);
  EXPECT_FALSE(sw.temperature_unstable);
  EXPECT_EQ(counts.sweeps_temperature_unstable, 0u);
}

TEST(SweepSegmenter, SettlingAfterATimeConstantOrRangeChange) {
  // tau changes 0.3 -> 0.1 s at reading 500 (t = 20 s): 5 * 0.1 = 0.5 s, the
  // readings at 20.00 .. 20.48 s: 13. The range changes at reading 1500
  // (t = 60 s), tau 0.1 s: 13 more.
  auto v = ramp(2000, kTau);
  for (std::size_t i = 500; i < v.size(); ++i) v[i].time_constant_s = 0.1;
  for (std::size_t i = 1500; i < v.size(); ++i) v[i].range_v = 1e-4;
  lphi::segment::SegmentCounts counts;
  const auto out = segment(v, noise_free_options(), 1000, &counts);
  EXPECT_EQ(counts.settling.range_or_time_constant, 26u);
  EXPECT_EQ(counts.settling.total(), 26u);
  ASSERT_EQ(out.sweeps.size(), 1u);
  EXPECT_FALSE(out.sweeps[0].temperature_unstable);
}

TEST(SweepSegmenter, SettlingAfterAFieldStep) {
  // Stepped magnet: a 20 mT jump at reading 1200, above field_step_t = 10 mT
  // (the ramp's own 0.1 mT per reading is below it). tau 0.1 s: 13 readings.
  auto v = ramp(2000, 0.1);
  for (std::size_t i = 1200; i < v.size(); ++i) v[i].field_t += 0.02;
  auto o = noise_free_options();
  o.field_step_t = 0.01;
  lphi::segment::SegmentCounts counts;
  const auto out = segment(v, o, 1000, &counts);
  EXPECT_EQ(counts.settling.field_step, 13u);
  EXPECT_EQ(counts.settling.total(), 13u);
  ASSERT_EQ(out.sweeps.size(), 1u);
  // Off by default: the same data without field_step_t exclude nothing.
  lphi::segment::SegmentCounts off;
  segment(v, noise_free_options(), 1000, &off);
  EXPECT_EQ(off.settling.total(), 0u);
}

TEST(SweepSegmenter, SettlingAfterAReversal) {
  // Triangle: 1001 readings up to +0.1 T (the apex at reading 1000,
  // t = 40 s), then down. tau 0.1 s: readings after the apex with
  // t < 40.5 s, i.e. 40.04 .. 40.48 s, are excluded: 12.
  auto up = ramp(1001, 0.1);
  std::vector<AlignedPoint> v = up;
  for (std::size_t i = 1; i < 1001; ++i) {
    AlignedPoint p = up[1000 - i];
    p.t_s = up[1000].t_s + static_cast<double>(i) * kDt;
    v.push_back(p);
  }
  lphi::segment::SegmentCounts counts;
  const auto out = segment(v, noise_free_options(), 1000, &counts);
  EXPECT_EQ(counts.settling.field_reversal, 12u);
  EXPECT_EQ(counts.settling.total(), 12u);
  ASSERT_EQ(out.sweeps.size(), 2u);
  EXPECT_EQ(out.sweeps[0].direction, Direction::up);
  EXPECT_EQ(out.sweeps[1].direction, Direction::down);
  EXPECT_EQ(out.sweeps[0].t_end_s, up[1000].t_s);  // ends at the apex
  EXPECT_EQ(out.sweeps[0].points.size(), 1001u);
  // Noise-free: no dwell to trim, so the down sweep is the 1000 readings
  // after the apex less the 12 settling.
  EXPECT_EQ(out.sweeps[1].points.size(), 1000u - 12u);
}

// ---- bounded memory ----------------------------------------------------------

TEST(SweepSegmenter, RunsStopAtMaxPoints) {
  // A ramp of 20000 readings with max_points 1000: the open run never holds
  // more than 1000 readings; each 1000-reading piece spans 10 mT, short of
  // the 100 mT span, so 20 pieces are discarded and nothing is emitted.
  auto o = noise_free_options();
  o.max_points = 1000;
  const auto v = ramp(20000, kTau);
  SweepSegmenter s(o);
  SegmentOutput out;
  std::size_t most = 0;
  for (const auto& p : v) {
    s.push(p, out);
    most = std::max(most, s.buffered_points());
  }
  s.finish(out);
  EXPECT_LE(most, 1000u);
  EXPECT_EQ(most, 1000u);
  EXPECT_TRUE(out.sweeps.empty());
  EXPECT_EQ(s.counts().truncated_discarded, 19u);  // the 20th is closed by finish
  EXPECT_EQ(s.counts().runs_short, 1u);
}

TEST(SweepSegmenter, ATruncatedSweepCoveringTheSpanIsEmittedAndFlagged) {
  // 800 readings of ramp, then the magnet sits at +0.1 T: the run reaches
  // max_points = 1000 at the dwell, is closed there, covers the span, and is
  // emitted with truncated = true and its dwell trimmed.
  auto o = noise_free_options();
  o.max_points = 1000;
  auto v = ramp(800, kTau);
  for (std::size_t i = 0; i < 500; ++i) {
    AlignedPoint p = v.back();
    p.t_s += kDt;
    v.push_back(p);
  }
  lphi::segment::SegmentCounts counts;
  const auto out = segment(v, o, 7, &counts);
  ASSERT_GE(out.sweeps.size(), 1u);
  EXPECT_TRUE(out.sweeps[0].truncated);
  EXPECT_EQ(counts.sweeps_truncated, 1u);
  // The traverse ends at the first reading at the top (the dwell repeats
  // that field): all 800 ramp readings, and the 200 dwell readings in the
  // run trimmed.
  EXPECT_EQ(out.sweeps[0].points.size(), 800u);
  EXPECT_EQ(out.sweeps[0].t_end_s, v[799].t_s);
  EXPECT_EQ(counts.dwell_points, 200u);
}

TEST(SweepSegmenter, RefusesBadPointsAndBadOptions) {
  SweepSegmenter s(noise_free_options());
  SegmentOutput out;
  auto v = ramp(10, kTau);
  v[3].field_t = std::numeric_limits<double>::quiet_NaN();
  v[5].temperature_k = 0.0;
  v[7].t_s = -1.0;  // earlier than its predecessor
  s.push(v, out);
  EXPECT_EQ(s.counts().refused, 3u);
  EXPECT_EQ(s.counts().points_received, 10u);

  auto o = noise_free_options();
  o.reversal_tolerance_t = 0.06;  // above half the span
  EXPECT_NE(lphi::segment::validate(o).find("reversal_tolerance_t"), std::string::npos);
  SweepSegmenter bad(o);
  EXPECT_FALSE(bad.error().empty());
  bad.push(ramp(100, kTau), out);
  bad.finish(out);
  EXPECT_EQ(bad.counts().refused, 100u);
  EXPECT_TRUE(out.sweeps.empty());
}

}  // namespace

// ---- through the aligner -----------------------------------------------------

namespace chain {

using lphi::align::Aligner;
using lphi::align::FieldReading;
using lphi::align::LockinReading;
using lphi::align::TemperatureReading;

// Raw streams of the cooldown above (three plateaus): lock-in at 25 Hz,
// thermometer every 2 s, field every 0.2 s, each read from the same
// piecewise history; then aligned and segmented.
struct Raw {
  std::vector<LockinReading> lockin;
  std::vector<TemperatureReading> temperature;
  std::vector<FieldReading> field;
};

Raw make_raw() {
  Cooldown c;
  c.temperatures_k = {0.5, 0.2, 0.1};
  const auto truth = make_cooldown(c);  // the history, sampled at 25 Hz
  Raw r;
  for (std::size_t i = 0; i < truth.size(); ++i) {
    const auto& p = truth[i];
    r.lockin.push_back({p.t_s + 0.013, p.x_v, p.y_v, p.range_v, p.time_constant_s, false});
    // The temperature history delayed by 10 s, so that each change falls in
    // the middle of the 20 s dwell at -0.1 T: interpolated between readings
    // 2 s apart, an instantaneous change at the end of a ramp would spread
    // into that ramp (and rightly mark it unstable).
    const std::size_t delayed = i >= 250 ? i - 250 : 0;
    if (i % 50 == 0) r.temperature.push_back({p.t_s, truth[delayed].temperature_k});
    if (i % 5 == 0) r.field.push_back({p.t_s, p.field_t});
  }
  return r;
}

// Arrival: the thermometer's readings come in bursts 10 s late, the field's
// 1 s late, the lock-in's on time (lags below the aligner's 30 s bound).
SegmentOutput run(const Raw& r, bool shuffled, std::size_t chunk) {
  Aligner a;
  std::vector<AlignedPoint> aligned;
  std::size_t it = 0, ib = 0;
  for (const auto& l : r.lockin) {
    const double lag_t = shuffled ? 10.0 : 0.0, lag_b = shuffled ? 1.0 : 0.0;
    while (it < r.temperature.size() && r.temperature[it].t_s + lag_t <= l.t_s)
      a.push(r.temperature[it++], aligned);
    while (ib < r.field.size() && r.field[ib].t_s + lag_b <= l.t_s) a.push(r.field[ib++], aligned);
    a.push(l, aligned);
  }
  while (it < r.temperature.size()) a.push(r.temperature[it++], aligned);
  while (ib < r.field.size()) a.push(r.field[ib++], aligned);
  a.flush(aligned);
  return segment(aligned, cooldown_options(), chunk);
}

}  // namespace chain

TEST(SweepSegmenter, AlignedStreamsGiveTheSameSweepsInAnyArrivalOrder) {
  const auto raw = chain::make_raw();
  const auto ordered = chain::run(raw, false, 1000);
  ASSERT_EQ(ordered.sweeps.size(), 6u);
  ASSERT_EQ(ordered.plateaus.size(), 3u);
  for (std::size_t i = 0; i < 6; ++i) {
    EXPECT_EQ(ordered.sweeps[i].direction, i % 2 == 0 ? Direction::up : Direction::down);
    EXPECT_FALSE(ordered.sweeps[i].temperature_unstable);
  }
  const auto late = chain::run(raw, true, 7);
  EXPECT_TRUE(late.sweeps == ordered.sweeps);
  EXPECT_TRUE(late.plateaus == ordered.plateaus);
}
