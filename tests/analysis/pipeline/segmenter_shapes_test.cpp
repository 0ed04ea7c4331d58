// SweepSegmenter on the sweep shapes real magnets make, with the span and
// the reversal tolerance left automatic (analysis/segmenter.hpp, "Which
// traverse is a sweep" and "Span and tolerance from the data"): one-sided
// sweeps, a magnet that sweeps only up and returns fast, +-2 mT sweeps with
// 1 uT field noise, +-1 T sweeps, noisy fields; the temperature drift per
// sweep against GSL's least-squares line; the Aligner's field noise and
// automatic field age on slow field readings.
#include <gsl/gsl_fit.h>
#include <gtest/gtest.h>

#include <cmath>
#include <cstddef>
#include <vector>

#include "analysis/alignment.hpp"
#include "analysis/segmenter.hpp"
#include "analysis/synthetic.hpp"
#include "tests/analysis/pipeline/segmenter_test_support.hpp"

namespace {

using namespace lphi::segment::testing;
using lphi::segment::Sides;

// Options as lphid's defaults leave them: span and tolerance automatic.
SegmenterOptions automatic_options() {
  SegmenterOptions o;
  o.plateau.min_duration_s = 200.0;
  return o;
}

struct Leg {
  double from_t, to_t;
  std::size_t points;
};

// Legs of a magnet's path at kDt per point, T = 50 mK, tau 0.3 s, with
// Gaussian field noise of sigma_t (seeded: lphi's own generator).
std::vector<AlignedPoint> path(const std::vector<Leg>& legs, double sigma_t, std::uint64_t seed = 3) {
  lphi::synthetic::NormalSource noise(seed);
  std::vector<AlignedPoint> v;
  for (const auto& leg : legs) {
    for (std::size_t i = 0; i < leg.points; ++i) {
      AlignedPoint p;
      p.t_s = static_cast<double>(v.size()) * kDt;
      const double u = leg.points > 1 ? static_cast<double>(i) / static_cast<double>(leg.points - 1) : 0.0;
      p.field_t = leg.from_t + (leg.to_t - leg.from_t) * u + sigma_t * noise.next();
      p.temperature_k = 0.05;
      p.x_v = 1e-6;
      p.range_v = 1e-5;
      p.time_constant_s = kTau;
      v.push_back(p);
    }
  }
  return v;
}

// n up/down pairs between -b and +b, with dwells of 200 points at each end.
std::vector<Leg> pairs(double b, std::size_t n, std::size_t ramp_points) {
  std::vector<Leg> legs;
  for (std::size_t k = 0; k < n; ++k) {
    legs.push_back({-b, -b, 200});
    legs.push_back({-b, b, ramp_points});
    legs.push_back({b, b, 200});
    legs.push_back({b, -b, ramp_points});
  }
  legs.push_back({-b, -b, 200});
  return legs;
}

TEST(SweepSegmenterShapes, OneSidedSweepsReachTheSpanOnOneSide) {
  // A unipolar magnet: 0 -> +20 mT, dwell, back to 0, dwell, again: four
  // one-sided traverses on the positive side (each starts or ends at zero,
  // and turns there). The same path mirrored: four on the negative side.
  // (A run that goes on through a dwell at zero, +20 -> 0 -> -20 mT, is
  // one two-sided sweep: it never turns.)
  for (const double sign : {1.0, -1.0}) {
    const double top = 0.02 * sign;
    const auto v = path({{0.0, 0.0, 200},
                         {0.0, top, 600},
                         {top, top, 200},
                         {top, 0.0, 600},
                         {0.0, 0.0, 200},
                         {0.0, top, 600},
                         {top, top, 200},
                         {top, 0.0, 600},
                         {0.0, 0.0, 200}},
                        1e-6);
    lphi::segment::SegmentCounts counts;
    const auto out = segment(v, automatic_options(), 97, &counts);
    ASSERT_EQ(out.sweeps.size(), 4u) << sign;
    for (std::size_t i = 0; i < 4; ++i) {
      const auto& s = out.sweeps[i];
      EXPECT_EQ(s.sides, sign > 0 ? Sides::positive : Sides::negative) << i;
      EXPECT_EQ(s.direction, (i % 2 == 0) == (sign > 0) ? Direction::up : Direction::down) << i;
      // A traverse that begins at a turn loses the 5 tau = 1.5 s of
      // settling after it: 1.25 mT at this ramp's 0.83 mT/s.
      EXPECT_LE(std::min(std::abs(s.field_min_t), std::abs(s.field_max_t)), 1.3e-3);
      EXPECT_GE(std::max(std::abs(s.field_min_t), std::abs(s.field_max_t)), 0.0187);
      EXPECT_GT(s.points.size(), 550u);
    }
    // With a span of 50 mT set, span/2 = 25 mT lies beyond the 20 mT
    // reached: none is a sweep, each is counted as below the span.
    auto fixed = automatic_options();
    fixed.min_span_t = 0.05;
    const auto none = segment(v, fixed, 97, &counts);
    EXPECT_TRUE(none.sweeps.empty());
    EXPECT_GE(counts.rejected.below_span, 4u);  // and runs of the first dwell's noise
  }
}

TEST(SweepSegmenterShapes, UpOnlyMagnetWithAFastReturn) {
  // A magnet that sweeps only up, -10 -> +10 mT over 800 points, and
  // returns in 8 points (few points) three times; then once more with a
  // return of 60 points (above min_points, but 800/60 = 13 times fewer
  // points per tesla than the sweeps: a fast return).
  std::vector<Leg> legs;
  for (int k = 0; k < 3; ++k) {
    legs.push_back({-0.01, -0.01, 100});
    legs.push_back({-0.01, 0.01, 800});
    legs.push_back({0.01, 0.01, 100});
    legs.push_back({0.01, -0.01, 8});
  }
  legs.push_back({-0.01, -0.01, 100});
  legs.push_back({-0.01, 0.01, 800});
  legs.push_back({0.01, 0.01, 100});
  legs.push_back({0.01, -0.01, 60});
  legs.push_back({-0.01, -0.01, 100});
  const auto v = path(legs, 1e-6);
  lphi::segment::SegmentCounts counts;
  const auto out = segment(v, automatic_options(), 64, &counts);
  ASSERT_EQ(out.sweeps.size(), 4u);
  for (const auto& s : out.sweeps) {
    EXPECT_EQ(s.direction, Direction::up);
    EXPECT_EQ(s.sides, Sides::two_sided);
    EXPECT_GT(s.points.size(), 700u);
  }
  // The 8-point returns lose their first points to the reversal's settling
  // (5 tau = 1.5 s = 37 points): nothing of them is left to count as a
  // run, or a few points are; none is a sweep.
  EXPECT_EQ(counts.rejected.fast_returns, 1u);
  EXPECT_EQ(counts.sweeps, 4u);
}

TEST(SweepSegmenterShapes, PlusMinusTwoMilliteslaWithOneMicroteslaNoise) {
  // The sweeps a dilution fridge takes at its lowest temperatures: +-2 mT,
  // 400 points a leg (10 uT a point), field noise 1 uT. The old fixed
  // tolerance of 1 mT and span of 0.1 T found none; the automatic rules
  // find all 6 (3 up/down pairs).
  const auto v = path(pairs(2e-3, 3, 400), 1e-6);
  lphi::segment::SweepSegmenter s(automatic_options());
  lphi::segment::SegmentOutput out;
  s.push(v, out);
  s.finish(out);
  ASSERT_EQ(out.sweeps.size(), 6u);
  for (std::size_t i = 0; i < out.sweeps.size(); ++i) {
    EXPECT_EQ(out.sweeps[i].direction, i % 2 == 0 ? Direction::up : Direction::down);
    EXPECT_EQ(out.sweeps[i].sides, Sides::two_sided);
    EXPECT_GT(out.sweeps[i].points.size(), 380u);
  }
  // The noise estimate against the truth, 1 uT (Monte Carlo): the MAD of
  // 64 chord residuals scaled by 1.4826 (the Gaussian consistency factor,
  // common practice) has a relative standard error of about 1.17/sqrt(64)
  // = 15 %; allow 3 of them. The tolerance is 20 sigma.
  EXPECT_NEAR(s.diagnostics().field_noise_t, 1e-6, 0.45e-6);
  EXPECT_NEAR(s.diagnostics().tolerance_t, 20.0 * s.diagnostics().field_noise_t, 1e-12);
  auto old = automatic_options();
  old.min_span_t = 0.1;
  old.reversal_tolerance_t = 1e-3;
  EXPECT_TRUE(segment(v, old, 1000).sweeps.empty());
}

TEST(SweepSegmenterShapes, PlusMinusOneTesla) {
  // +-1 T, 2000 points a leg (1 mT a point), field noise 50 uT: 4 sweeps.
  const auto v = path(pairs(1.0, 2, 2000), 5e-5);
  lphi::segment::SegmentCounts counts;
  const auto out = segment(v, automatic_options(), 500, &counts);
  ASSERT_EQ(out.sweeps.size(), 4u);
  for (const auto& s : out.sweeps) {
    EXPECT_EQ(s.sides, Sides::two_sided);
    EXPECT_LT(s.field_min_t, -0.99);
    EXPECT_GT(s.field_max_t, 0.99);
  }
}

TEST(SweepSegmenterShapes, TheAutomaticToleranceFollowsANoisyField) {
  // +-5 mT in 500 points a leg (20 uT a point) with 30 uT of field noise:
  // a fixed tolerance of 5 uT breaks every leg at the noise's falls (no
  // sweep survives); the automatic one, 20 sigma = 0.6 mT, finds the 4.
  const auto v = path(pairs(5e-3, 2, 500), 3e-5);
  auto tight = automatic_options();
  tight.reversal_tolerance_t = 5e-6;
  lphi::segment::SegmentCounts tight_counts;
  const auto broken = segment(v, tight, 100, &tight_counts);
  EXPECT_TRUE(broken.sweeps.empty());
  EXPECT_GT(tight_counts.runs_short, 50u);
  lphi::segment::SweepSegmenter s(automatic_options());
  lphi::segment::SegmentOutput out;
  s.push(v, out);
  s.finish(out);
  EXPECT_EQ(out.sweeps.size(), 4u);
  EXPECT_GT(s.diagnostics().tolerance_t, 3e-4);
  EXPECT_LT(s.diagnostics().tolerance_t, 9e-4);
}

TEST(SweepSegmenterShapes, AMagnetParkedAtZeroMakesNoSweep) {
  // 20000 points at 0 T with 2 uT noise (a temperature change with the
  // magnet parked): no sweep, whatever runs the noise makes.
  const auto v = path({{0.0, 0.0, 20000}}, 2e-6);
  lphi::segment::SegmentCounts counts;
  const auto out = segment(v, automatic_options(), 333, &counts);
  EXPECT_TRUE(out.sweeps.empty());
}

TEST(SweepSegmenterShapes, TemperatureDriftIsTheLeastSquaresLine) {
  // T drifts 3 % over a +-10 mT sweep (50 mK -> 51.5 mK) with 0.1 %
  // noise. Drift and scatter against GSL's gsl_fit_linear on the same
  // points (an independent least-squares fit): agreement to rounding.
  auto v = path({{-0.01, -0.01, 100}, {-0.01, 0.01, 1000}, {0.01, 0.01, 100}}, 1e-6);
  lphi::synthetic::NormalSource noise(11);
  for (auto& p : v) p.temperature_k = 0.05 * (1.0 + 0.03 * p.t_s / v.back().t_s) * (1.0 + 1e-3 * noise.next());
  auto o = automatic_options();
  o.plateau.relative_spread = 0.1;
  const auto out = segment(v, o, 1000);
  ASSERT_EQ(out.sweeps.size(), 1u);
  const auto& sw = out.sweeps[0];
  std::vector<double> t, temperature;
  for (const auto& p : sw.points) {
    t.push_back(p.t_s);
    temperature.push_back(p.temperature_k);
  }
  double c0 = 0, c1 = 0, cov00 = 0, cov01 = 0, cov11 = 0, sumsq = 0;
  gsl_fit_linear(t.data(), 1, temperature.data(), 1, t.size(), &c0, &c1, &cov00, &cov01, &cov11, &sumsq);
  EXPECT_NEAR(sw.temperature_drift_k, c1 * (sw.t_end_s - sw.t_start_s), 1e-12);
  EXPECT_NEAR(sw.temperature_residual_k, std::sqrt(sumsq / static_cast<double>(t.size() - 2)), 1e-12);
  // And against the truth: the sweep spans 1000/1200 of the 3 % ramp.
  EXPECT_NEAR(sw.temperature_drift_k, 0.05 * 0.03 * (sw.t_end_s - sw.t_start_s) / v.back().t_s, 2e-5);
  EXPECT_NEAR(sw.temperature_residual_k, 0.05 * 1e-3, 0.1 * 0.05 * 1e-3);
  EXPECT_FALSE(sw.temperature_unstable) << "a smooth drift is judged downstream, not here";
}

TEST(AlignerFieldStream, SlowFieldReadingsAreNotDroppedAndTheirNoiseIsKnown) {
  // The field read every 5 s (a magnet power supply polled slowly) on a
  // ramp of 0.1 mT/s with 20 uT noise, the lock-in at 20 Hz, T every 1 s.
  // A fixed 2 s age dropped all but the readings within 2 s of a field
  // reading; the automatic limit (5 x 5 s = 25 s) keeps every lock-in
  // reading between the first and the last field reading.
  lphi::synthetic::NormalSource noise(19);
  std::vector<lphi::align::FieldReading> field;
  for (int i = 0; i <= 120; ++i) field.push_back({5.0 * i, 1e-4 * 5.0 * i + 2e-5 * noise.next()});
  auto run = [&](const lphi::align::AlignerOptions& o, lphi::align::AlignmentCounts& counts,
                 std::vector<AlignedPoint>& out) {
    lphi::align::Aligner a(o);
    std::size_t f = 0;
    for (int i = 0; i <= 12000; ++i) {
      const double t = 0.05 * i;
      while (f < field.size() && field[f].t_s <= t) a.push(field[f++], out);
      if (i % 20 == 0) a.push(lphi::align::TemperatureReading{t, 0.05}, out);
      a.push(lphi::align::LockinReading{t, 1e-6, 0.0, 1e-5, 0.1, false}, out);
    }
    while (f < field.size()) a.push(field[f++], out);
    a.push(lphi::align::TemperatureReading{700.0, 0.05}, out);
    a.flush(out);
    counts = a.counts();
    return a.field_stats();
  };
  lphi::align::AlignmentCounts automatic_counts, fixed_counts;
  std::vector<AlignedPoint> automatic_points, fixed_points;
  const auto stats = run(lphi::align::AlignerOptions{}, automatic_counts, automatic_points);
  EXPECT_EQ(automatic_counts.missing_field, 0u);
  EXPECT_EQ(automatic_counts.aligned, 12001u);
  EXPECT_DOUBLE_EQ(stats.median_interval_s, 5.0);
  EXPECT_DOUBLE_EQ(stats.age_limit_s, 25.0);
  lphi::align::AlignerOptions fixed;
  fixed.max_age_field_s = 2.0;
  run(fixed, fixed_counts, fixed_points);
  // Within 2 s of a reading on both sides never happens 5 s apart, except
  // at the readings themselves: 121 exact points.
  EXPECT_EQ(fixed_counts.aligned, 121u);
  EXPECT_EQ(fixed_counts.missing_field, 12001u - 121u);
  // The noise estimate against the truth, 20 uT (Monte Carlo; 64
  // residuals: 15 % relative standard error, allow 3).
  EXPECT_NEAR(automatic_points.back().field_noise_t, 2e-5, 0.9e-5);
}

}  // namespace
