// PlateauDetector and SweepSegmenter on synthetic cooldowns: counts of
// plateaus and sweeps, directions, a sweep straddling a temperature step,
// chunking invariance, and the same sweeps through the aligner in any
// arrival order. Settling exclusions and bounded memory are in
// segmenter_settling_test.cpp (the same executable); the cooldown is
// described in segmenter_test_support.hpp.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

#include "analysis/segmenter.hpp"
#include "tests/analysis/pipeline/segmenter_test_support.hpp"

namespace {

using namespace lphi::segment::testing;  // the shared cooldown and its helpers

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
