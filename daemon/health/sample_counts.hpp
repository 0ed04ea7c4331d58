// sample_counts: what one sample's analysis dropped, by reason, and why a
// sample has no sweeps, for lphid's status reply, the progress reply and
// its log (daemon/PROTOCOL.md, "status").
//
// SampleCounts is a plain copy of the Aligner's and the SweepSegmenter's
// counts and diagnostics (analysis/alignment.hpp, analysis/segmenter.hpp),
// taken by the sample's worker after each step. From it:
//   - dropped_by_reason(): every reading or run that did not reach a sweep,
//     as "stage.reason" -> count (the keys of "dropped" in the replies);
//   - no_sweeps_reason(): one sentence naming the first cause found, in the
//     order the readings meet them (no readings, alignment, settling,
//     field range, span, points), with the numbers and the setting
//     involved; empty when the sample has sweeps;
//   - DropLog: which log lines to write, one per reason when its count first
//     becomes non-zero, then at most once per interval one line with the
//     totals that changed (no log flood, however many readings are dropped).
//
// Pure functions and a plain value; DropLog takes the time from its caller.
// Not safe for concurrent use (one DropLog per sample worker).
#pragma once

#include <cstddef>
#include <map>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "analysis/alignment.hpp"
#include "analysis/segmenter.hpp"

namespace lphi::health {

struct SampleCounts {
  std::string sample;
  align::AlignmentCounts alignment;
  align::FieldStreamStats field;
  segment::SegmentCounts segmentation;
  segment::SegmentDiagnostics diagnostics;
  // Set in the config (false: the automatic rule is in force).
  bool field_age_set = false, span_set = false, tolerance_set = false;
  bool operator==(const SampleCounts&) const = default;
};

// "stage.reason" -> count, zeros included (a fixed set of keys).
std::map<std::string, std::size_t> dropped_by_reason(const SampleCounts& counts);

// Empty when the sample has sweeps (or has had no reading yet: then "no
// readings yet"), else why not.
std::string no_sweeps_reason(const SampleCounts& counts);

// {"sample", "sweeps", "dropped": {"aligner": {...}, "segmenter": {...}},
//  "field": {median_interval_s, age_limit_s, noise_t, tolerance_t,
//  half_span_t, min_t, max_t}, "no_sweeps_reason": string or null}
nlohmann::json sample_counts_json(const SampleCounts& counts);

class DropLog {
 public:
  explicit DropLog(double interval_s = 60.0) : interval_s_(interval_s) {}
  // The lines to log now (possibly none), for the counts at time now_s.
  std::vector<std::string> update(const SampleCounts& counts, double now_s);

 private:
  double interval_s_;
  std::map<std::string, std::size_t> logged_;  // the totals last written
  double last_summary_s_ = 0.0;
  bool summarised_ = false;
};

}  // namespace lphi::health
