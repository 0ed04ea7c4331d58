#include "daemon/health/sample_counts.hpp"

#include <algorithm>
#include <cmath>
#include <fmt/format.h>

namespace lphi::health {

using nlohmann::json;

namespace {

// A field in the unit a physicist reads it in: mT below 1 T.
std::string field_text(double t) {
  if (std::abs(t) < 1.0) return fmt::format("{:.3g} mT", t * 1e3);
  return fmt::format("{:.3g} T", t);
}

std::map<std::string, std::size_t> aligner_drops(const align::AlignmentCounts& a) {
  return {{"field_too_old", a.missing_field},
          {"temperature_too_old", a.missing_temperature},
          {"decided_by_hold", a.decided_by_hold},
          {"decided_by_capacity", a.decided_by_capacity},
          {"refused_lockin", a.refused_lockin},
          {"refused_temperature", a.refused_temperature},
          {"refused_field", a.refused_field},
          {"out_of_order_lockin", a.out_of_order_lockin},
          {"out_of_order_temperature", a.out_of_order_temperature},
          {"out_of_order_field", a.out_of_order_field},
          {"buffer_full_temperature", a.dropped_temperature},
          {"buffer_full_field", a.dropped_field}};
}

std::map<std::string, std::size_t> segmenter_drops(const segment::SegmentCounts& s) {
  return {{"refused", s.refused},
          {"settling_temperature_change", s.settling.temperature_change},
          {"settling_field_step", s.settling.field_step},
          {"settling_field_reversal", s.settling.field_reversal},
          {"settling_range_or_time_constant", s.settling.range_or_time_constant},
          {"dwell_points", s.dwell_points},
          {"runs_no_direction", s.rejected.no_direction},
          {"runs_off_zero", s.rejected.off_zero},
          {"runs_below_span", s.rejected.below_span},
          {"runs_few_points", s.rejected.few_points},
          {"runs_fast_return", s.rejected.fast_returns},
          {"runs_approach_leg", s.rejected.approach_legs},
          {"runs_truncated", s.truncated_discarded}};
}

}  // namespace

std::map<std::string, std::size_t> dropped_by_reason(const SampleCounts& c) {
  std::map<std::string, std::size_t> out;
  for (const auto& [k, n] : aligner_drops(c.alignment)) out["aligner." + k] = n;
  for (const auto& [k, n] : segmenter_drops(c.segmentation)) out["segmenter." + k] = n;
  return out;
}

std::string no_sweeps_reason(const SampleCounts& c) {
  const auto& a = c.alignment;
  const auto& s = c.segmentation;
  const auto& d = c.diagnostics;
  if (s.sweeps > 0) return {};
  if (a.lockin_received == 0) return "no lock-in readings yet";
  if (a.refused_lockin + a.out_of_order_lockin >= a.lockin_received) {
    return fmt::format("all {} lock-in readings were refused (non-finite, negative or out of order)",
                       a.lockin_received);
  }
  if (a.aligned == 0 || a.unused >= a.aligned) {
    if (a.missing_field >= a.missing_temperature && a.missing_field > 0) {
      const std::string limit =
          c.field_age_set ? fmt::format("max_age_field_s = {:.3g} s", c.field.age_limit_s)
                          : fmt::format("the automatic limit of {:.3g} s (max_age_field_s unset)", c.field.age_limit_s);
      if (c.field.median_interval_s > 0.0) {
        return fmt::format("field readings arrive every {:.3g} s, older than {}: {} of {} lock-in readings "
                           "had no field reading that recent on each side",
                           c.field.median_interval_s, limit, a.missing_field, a.lockin_received);
      }
      return fmt::format("no field readings around the lock-in readings: {} of {} had none within {}",
                         a.missing_field, a.lockin_received, limit);
    }
    if (a.missing_temperature > 0) {
      return fmt::format("{} of {} lock-in readings had no thermometer reading within max_age_temperature_s "
                         "on each side (is the thermometer read?)",
                         a.missing_temperature, a.lockin_received);
    }
    if (a.aligned == 0) return "lock-in readings wait for the thermometer and the magnet to catch up";
  }
  if (s.points_received > 0 && s.settling.total() * 10 >= s.points_received * 9) {
    return fmt::format("{} of {} points fell in the lock-in's settling time (temperature changes {}, field "
                       "steps {}, reversals {}, range or time constant changes {}): see settling_time_constants",
                       s.settling.total(), s.points_received, s.settling.temperature_change,
                       s.settling.field_step, s.settling.field_reversal, s.settling.range_or_time_constant);
  }
  if (s.points_received == 0) return "no aligned points yet";
  const std::string tolerance =
      fmt::format("{} ({})", field_text(d.tolerance_t),
                  c.tolerance_set ? "reversal_tolerance_t" : "automatic, from the field noise");
  if (d.field_max_t - d.field_min_t <= d.tolerance_t) {
    return fmt::format("the field did not move: it stayed between {} and {}, within the reversal tolerance {}",
                       field_text(d.field_min_t), field_text(d.field_max_t), tolerance);
  }
  if (d.field_min_t > d.tolerance_t || d.field_max_t < -d.tolerance_t) {
    return fmt::format("the field never passed through zero: it stayed between {} and {}",
                       field_text(d.field_min_t), field_text(d.field_max_t));
  }
  const auto& r = s.rejected;
  if (r.below_span > 0 && r.few_points == 0 && r.fast_returns == 0) {
    const std::string needed =
        c.span_set ? fmt::format("sweep_min_span_t {}", field_text(2.0 * d.half_span_t))
                   : "automatic: a tenth of the largest field recently reached, at least 5 reversal tolerances";
    return fmt::format("largest field excursion {}, below the span needed ({} on one side of zero, {})",
                       field_text(d.largest_reach_t), field_text(d.half_span_t), needed);
  }
  if (r.few_points > 0 || r.fast_returns > 0) {
    return fmt::format("runs through zero field held too few points: {} below min_points, {} fast returns "
                       "(below a fifth of the last sweep's points per tesla)",
                       r.few_points, r.fast_returns);
  }
  return fmt::format("no run has ended yet (a sweep ends when the field turns back by more than {}, or when "
                     "a recording ends); the field has moved between {} and {}",
                     tolerance, field_text(d.field_min_t), field_text(d.field_max_t));
}

json sample_counts_json(const SampleCounts& c) {
  json aligner = json::object(), segmenter = json::object();
  for (const auto& [k, n] : aligner_drops(c.alignment)) aligner[k] = n;
  for (const auto& [k, n] : segmenter_drops(c.segmentation)) segmenter[k] = n;
  const std::string reason = no_sweeps_reason(c);
  return {{"sample", c.sample},
          {"lockin_readings", c.alignment.lockin_received},
          {"aligned_points", c.alignment.aligned},
          {"sweeps", c.segmentation.sweeps},
          {"dropped", {{"aligner", std::move(aligner)}, {"segmenter", std::move(segmenter)}}},
          {"field",
           {{"median_interval_s", c.field.median_interval_s},
            {"age_limit_s", c.field.age_limit_s},
            {"noise_t", c.diagnostics.field_noise_t},
            {"reversal_tolerance_t", c.diagnostics.tolerance_t},
            {"half_span_t", c.diagnostics.half_span_t},
            {"min_t", c.diagnostics.field_min_t},
            {"max_t", c.diagnostics.field_max_t}}},
          {"no_sweeps_reason", reason.empty() ? json(nullptr) : json(reason)}};
}

std::vector<std::string> DropLog::update(const SampleCounts& c, double now_s) {
  std::vector<std::string> lines;
  const auto now = dropped_by_reason(c);
  for (const auto& [key, n] : now) {
    if (n > 0 && logged_.find(key) == logged_.end()) {
      lines.push_back(fmt::format("sample {}: dropping readings or runs: {} (first {})", c.sample, key, n));
      logged_[key] = n;
    }
  }
  if (!summarised_) {
    summarised_ = true;
    last_summary_s_ = now_s;
    return lines;
  }
  if (now_s - last_summary_s_ < interval_s_) return lines;
  std::string changed;
  for (const auto& [key, n] : now) {
    const auto it = logged_.find(key);
    if (it == logged_.end() || it->second == n) continue;
    changed += fmt::format("{}{}={}", changed.empty() ? "" : ", ", key, n);
    it->second = n;
  }
  if (!changed.empty()) {
    lines.push_back(fmt::format("sample {}: dropped so far: {}", c.sample, changed));
    last_summary_s_ = now_s;
  }
  return lines;
}

}  // namespace lphi::health
