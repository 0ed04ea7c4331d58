// sample_counts: the drops by reason, the reason a sample has no sweeps and
// the rate-limited drop log, on counts taken from a real Aligner and
// SweepSegmenter fed synthetic readings (no hand-made counters where the
// real parts can run), and on the log's timing with the time given.
#include <gmock/gmock.h>
#include <gtest/gtest.h>

#include <string>
#include <vector>

#include "analysis/alignment.hpp"
#include "analysis/segmenter.hpp"
#include "daemon/health/sample_counts.hpp"

namespace {

using ::testing::HasSubstr;
using lphi::health::SampleCounts;

// A lock-in at 20 Hz for 200 s, a thermometer every second, and a field read
// every field_interval_s that ramps between from_t and to_t (a triangle of
// period 80 s), through a real Aligner and SweepSegmenter with lphid's
// default (automatic) settings unless told.
SampleCounts analyse(double field_interval_s, double from_t, double to_t,
                     lphi::align::AlignerOptions ao = {}, lphi::segment::SegmenterOptions so = {}) {
  lphi::align::Aligner aligner(ao);
  lphi::segment::SweepSegmenter segmenter(so);
  std::vector<lphi::align::AlignedPoint> points;
  lphi::segment::SegmentOutput out;
  auto field = [&](double t) {
    const double u = std::fmod(t, 80.0) / 40.0;
    return from_t + (to_t - from_t) * (u < 1.0 ? u : 2.0 - u);
  };
  double next_field = 0.0;
  for (int i = 0; i <= 4000; ++i) {
    const double t = 0.05 * i;
    while (next_field <= t) {
      aligner.push(lphi::align::FieldReading{next_field, field(next_field)}, points);
      next_field += field_interval_s;
    }
    if (i % 20 == 0) aligner.push(lphi::align::TemperatureReading{t, 0.05}, points);
    aligner.push(lphi::align::LockinReading{t, 1e-6, 0.0, 1e-5, 0.1, false}, points);
  }
  aligner.push(lphi::align::FieldReading{next_field, field(next_field)}, points);
  aligner.push(lphi::align::TemperatureReading{300.0, 0.05}, points);
  aligner.flush(points);
  segmenter.push(points, out);
  SampleCounts c;
  c.sample = "film-a";
  c.alignment = aligner.counts();
  c.field = aligner.field_stats();
  c.segmentation = segmenter.counts();
  c.diagnostics = segmenter.diagnostics();
  c.field_age_set = ao.max_age_field_s.has_value();
  c.span_set = so.min_span_t.has_value();
  c.tolerance_set = so.reversal_tolerance_t.has_value();
  return c;
}

TEST(SampleCounts, ASweepingSampleHasNoReason) {
  const auto c = analyse(0.5, -0.02, 0.02);
  EXPECT_GT(c.segmentation.sweeps, 0u);
  EXPECT_EQ(lphi::health::no_sweeps_reason(c), "");
  EXPECT_TRUE(lphi::health::sample_counts_json(c).at("no_sweeps_reason").is_null());
}

TEST(SampleCounts, AFieldBelowAFixedSpanNamesTheExcursionAndTheSetting) {
  // +-10 mT sweeps with sweep_min_span_t = 100 mT set: each run reaches
  // 10 mT from zero, below the 50 mT needed on one side.
  lphi::segment::SegmenterOptions so;
  so.min_span_t = 0.1;
  const auto c = analyse(0.5, -0.01, 0.01, {}, so);
  EXPECT_EQ(c.segmentation.sweeps, 0u);
  EXPECT_GT(c.segmentation.rejected.below_span, 0u);
  const std::string why = lphi::health::no_sweeps_reason(c);
  EXPECT_THAT(why, HasSubstr("largest field excursion 10 mT, below the span needed (50 mT on one side of "
                             "zero, sweep_min_span_t 100 mT)"));
  EXPECT_EQ(lphi::health::dropped_by_reason(c).at("segmenter.runs_below_span"), c.segmentation.rejected.below_span);
}

TEST(SampleCounts, SlowFieldReadingsWithAFixedAgeNameTheInterval) {
  // The field read every 5 s with max_age_field_s = 2 s set: no lock-in
  // reading has a field reading that recent on both sides, except the ones
  // at a field reading's own time.
  lphi::align::AlignerOptions ao;
  ao.max_age_field_s = 2.0;
  const auto c = analyse(5.0, -0.02, 0.02, ao);
  EXPECT_EQ(c.segmentation.sweeps, 0u);
  EXPECT_THAT(lphi::health::no_sweeps_reason(c),
              HasSubstr("field readings arrive every 5 s, older than max_age_field_s = 2 s"));
  EXPECT_EQ(lphi::health::dropped_by_reason(c).at("aligner.field_too_old"), c.alignment.missing_field);
  // The automatic limit, 25 s, keeps them: the sweeps are found.
  EXPECT_GT(analyse(5.0, -0.02, 0.02).segmentation.sweeps, 0u);
}

TEST(SampleCounts, TheLogSaysEachReasonOnceThenSumsUpAtMostOncePerInterval) {
  lphi::align::AlignerOptions ao;
  ao.max_age_field_s = 2.0;
  auto c = analyse(5.0, -0.02, 0.02, ao);
  lphi::health::DropLog log(60.0);
  const auto first = log.update(c, 1000.0);
  ASSERT_FALSE(first.empty());
  bool named = false;
  for (const auto& line : first) named = named || line.find("aligner.field_too_old") != std::string::npos;
  EXPECT_TRUE(named);
  // Nothing new: nothing logged, however often asked.
  EXPECT_TRUE(log.update(c, 1001.0).empty());
  // More drops within the minute: still nothing; after it, one line.
  c.alignment.missing_field += 100;
  EXPECT_TRUE(log.update(c, 1030.0).empty());
  const auto later = log.update(c, 1061.0);
  ASSERT_EQ(later.size(), 1u);
  EXPECT_THAT(later[0], HasSubstr("aligner.field_too_old=" + std::to_string(c.alignment.missing_field)));
  EXPECT_TRUE(log.update(c, 1200.0).empty()) << "no change, no line";
  // A reason that was zero so far is logged at once.
  c.segmentation.rejected.fast_returns = 1;
  const auto fresh = log.update(c, 1201.0);
  ASSERT_EQ(fresh.size(), 1u);
  EXPECT_THAT(fresh[0], HasSubstr("segmenter.runs_fast_return"));
}

}  // namespace
