// SweepSegmenter on noise-free ramps: settling exclusions counted by hand
// (after a temperature step, a time constant or range change, a field step,
// a reversal), bounded memory (max_points, truncated sweeps) and refusals.
// The counts and directions on a full cooldown are in segmenter_test.cpp (the
// same executable); the cooldown is described in segmenter_test_support.hpp.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

#include "analysis/segmenter.hpp"
#include "tests/analysis/pipeline/segmenter_test_support.hpp"

namespace {

using namespace lphi::segment::testing;  // the shared cooldown and its helpers

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
