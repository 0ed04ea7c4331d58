#include "analysis/segmenter.hpp"

#include <algorithm>
#include <cmath>

namespace lphi::segment {

void TemperatureAccumulator::add(double temperature_k) {
  ++n_;
  if (n_ == 1) {
    min_ = max_ = temperature_k;
  } else {
    min_ = std::min(min_, temperature_k);
    max_ = std::max(max_, temperature_k);
  }
  const double delta = temperature_k - mean_;
  mean_ += delta / static_cast<double>(n_);
  m2_ += delta * (temperature_k - mean_);
}

TemperatureStats TemperatureAccumulator::stats() const {
  TemperatureStats s;
  s.n = n_;
  if (n_ == 0) return s;
  s.mean_k = mean_;
  s.std_k = n_ > 1 ? std::sqrt(std::max(0.0, m2_ / static_cast<double>(n_ - 1))) : 0.0;
  s.min_k = min_;
  s.max_k = max_;
  return s;
}

PlateauDetector::PlateauDetector(const PlateauOptions& options) : options_(options) {}

bool PlateauDetector::push(double t_s, double temperature_k, std::vector<Plateau>& out) {
  if (acc_.n() == 0) {
    acc_.add(temperature_k);
    t_start_s_ = t_last_s_ = t_s;
    return false;
  }
  const double lo = std::min(acc_.min_k(), temperature_k);
  const double hi = std::max(acc_.max_k(), temperature_k);
  const double n = static_cast<double>(acc_.n());
  const double mean = (acc_.mean_k() * n + temperature_k) / (n + 1.0);
  if (hi - lo <= options_.relative_spread * mean) {
    acc_.add(temperature_k);
    t_last_s_ = t_s;
    return false;
  }
  close(out);
  ++run_;
  acc_ = TemperatureAccumulator{};
  acc_.add(temperature_k);
  t_start_s_ = t_last_s_ = t_s;
  return true;
}

void PlateauDetector::finish(std::vector<Plateau>& out) {
  if (acc_.n() == 0) return;
  close(out);
  ++run_;
  acc_ = TemperatureAccumulator{};
}

void PlateauDetector::close(std::vector<Plateau>& out) {
  if (t_last_s_ - t_start_s_ < options_.min_duration_s) return;
  out.push_back({run_, t_start_s_, t_last_s_, acc_.stats()});
}

std::string_view direction_name(Direction d) { return d == Direction::up ? "up" : "down"; }

std::string_view sides_name(Sides s) {
  switch (s) {
    case Sides::two_sided: return "two-sided";
    case Sides::positive: return "positive";
    case Sides::negative: return "negative";
  }
  return "two-sided";
}

std::string validate(const SegmenterOptions& o) {
  auto finite_nonneg = [](double v) { return std::isfinite(v) && v >= 0.0; };
  if (!finite_nonneg(o.plateau.relative_spread))
    return "plateau.relative_spread must be finite and >= 0";
  if (!finite_nonneg(o.plateau.min_duration_s))
    return "plateau.min_duration_s must be finite and >= 0";
  auto positive = [](double v) { return std::isfinite(v) && v > 0.0; };
  if (o.min_span_t && !positive(*o.min_span_t))
    return "min_span_t must be finite and > 0 (or unset: automatic)";
  if (o.reversal_tolerance_t && !finite_nonneg(*o.reversal_tolerance_t))
    return "reversal_tolerance_t must be finite and >= 0 (or unset: automatic)";
  if (o.min_span_t && o.reversal_tolerance_t && *o.reversal_tolerance_t >= *o.min_span_t / 2.0)
    return "reversal_tolerance_t must be below min_span_t / 2";
  if (!positive(o.span_fraction) || o.span_fraction > 1.0)
    return "span_fraction must be in (0, 1]";
  if (o.span_recent_runs < 1) return "span_recent_runs must be at least 1";
  if (!positive(o.span_floor_tolerances)) return "span_floor_tolerances must be finite and > 0";
  if (!positive(o.tolerance_noise_factor)) return "tolerance_noise_factor must be finite and > 0";
  if (!positive(o.tolerance_floor_t) || !positive(o.tolerance_cap_t) ||
      o.tolerance_floor_t > o.tolerance_cap_t)
    return "tolerance_floor_t and tolerance_cap_t must be finite, > 0 and floor <= cap";
  if (o.min_points < 2) return "min_points must be at least 2";
  if (!finite_nonneg(o.fast_return_density) || o.fast_return_density >= 1.0)
    return "fast_return_density must be in [0, 1)";
  if (!finite_nonneg(o.field_step_t)) return "field_step_t must be finite and >= 0 (0 off)";
  if (!finite_nonneg(o.settling_time_constants))
    return "settling_time_constants must be finite and >= 0";
  if (!finite_nonneg(o.settling_unknown_tau_s))
    return "settling_unknown_tau_s must be finite and >= 0";
  if (o.max_points < 16) return "max_points must be at least 16";
  return {};
}

SweepSegmenter::SweepSegmenter(const SegmenterOptions& options)
    : options_(options), error_(validate(options)), plateaus_(options.plateau) {}

double SweepSegmenter::settle_s(const align::AlignedPoint& p) const {
  return p.time_constant_s > 0.0 ? options_.settling_time_constants * p.time_constant_s
                                 : options_.settling_unknown_tau_s;
}

// Overlapping windows merge; the one ending last names the reason.
void SweepSegmenter::start_settling(double until_s, SettleReason reason) {
  if (!settling_ || until_s >= settle_until_s_) {
    settling_ = true;
    settle_until_s_ = until_s;
    settle_reason_ = reason;
  }
}

void SweepSegmenter::count_settling(SettleReason reason) {
  switch (reason) {
    case SettleReason::temperature_change: ++counts_.settling.temperature_change; break;
    case SettleReason::field_step: ++counts_.settling.field_step; break;
    case SettleReason::field_reversal: ++counts_.settling.field_reversal; break;
    case SettleReason::lockin_setting: ++counts_.settling.range_or_time_constant; break;
  }
}

void SweepSegmenter::push(std::span<const align::AlignedPoint> points, SegmentOutput& out) {
  for (const auto& p : points) push(p, out);
}

void SweepSegmenter::push(const align::AlignedPoint& p, SegmentOutput& out) {
  ++counts_.points_received;
  const bool valid = std::isfinite(p.t_s) && std::isfinite(p.field_t) &&
                     std::isfinite(p.temperature_k) && p.temperature_k > 0.0;
  if (!error_.empty() || !valid || (have_previous_ && p.t_s < previous_.t_s)) {
    ++counts_.refused;
    return;
  }

  const std::size_t plateaus_before = out.plateaus.size();
  const bool temperature_changed = plateaus_.push(p.t_s, p.temperature_k, out.plateaus);
  counts_.plateaus += out.plateaus.size() - plateaus_before;

  if (temperature_changed) start_settling(p.t_s + settle_s(p), SettleReason::temperature_change);
  if (have_previous_) {
    if (p.range_v != previous_.range_v || p.time_constant_s != previous_.time_constant_s)
      start_settling(p.t_s + settle_s(p), SettleReason::lockin_setting);
    if (options_.field_step_t > 0.0 &&
        std::abs(p.field_t - previous_.field_t) > options_.field_step_t)
      start_settling(p.t_s + settle_s(p), SettleReason::field_step);
  }
  previous_ = p;
  have_previous_ = true;
  track_field(p);

  if (settling_ && p.t_s < settle_until_s_) {
    count_settling(settle_reason_);
    return;
  }
  add_to_run({p, plateaus_.run()}, out);
}

// The field's range, its noise and the tolerance in force, as of point p.
void SweepSegmenter::track_field(const align::AlignedPoint& p) {
  if (!seen_field_) {
    diagnostics_.field_min_t = diagnostics_.field_max_t = p.field_t;
    seen_field_ = true;
  }
  diagnostics_.field_min_t = std::min(diagnostics_.field_min_t, p.field_t);
  diagnostics_.field_max_t = std::max(diagnostics_.field_max_t, p.field_t);
  point_noise_.add(p.t_s, p.field_t);
  const double sigma_t = std::max(p.field_noise_t, point_noise_.noise_t());
  diagnostics_.field_noise_t = sigma_t;
  tolerance_t_ = options_.reversal_tolerance_t
                     ? *options_.reversal_tolerance_t
                     : std::clamp(options_.tolerance_noise_factor * sigma_t, options_.tolerance_floor_t,
                                  options_.tolerance_cap_t);
  diagnostics_.tolerance_t = tolerance_t_;
}

// span/2 for a closed run that reached |B| = reach_t (see Span and
// tolerance from the data).
double SweepSegmenter::half_span_t(double reach_t) {
  recent_reach_t_.push_back(reach_t);
  while (recent_reach_t_.size() > options_.span_recent_runs) recent_reach_t_.pop_front();
  double half = 0.0;
  if (options_.min_span_t) {
    half = *options_.min_span_t / 2.0;
  } else {
    const double largest = *std::max_element(recent_reach_t_.begin(), recent_reach_t_.end());
    half = std::max(options_.span_fraction * largest, options_.span_floor_tolerances * tolerance_t_);
  }
  diagnostics_.half_span_t = half;
  return half;
}

void SweepSegmenter::add_to_run(const Held& h, SegmentOutput& out) {
  if (run_.size() >= options_.max_points) close_run(run_.size(), true, out);

  const double b = h.point.field_t;
  const double tol = tolerance_t_;
  if (run_.empty()) {
    run_.push_back(h);
    extreme_ = low_ = high_ = 0;
    return;
  }
  switch (direction_) {
    case RunDirection::unknown: {
      // Until now high - low <= tol, so a point more than tol from one end
      // is a new extreme at the other, and fixes the direction.
      run_.push_back(h);
      const std::size_t i = run_.size() - 1;
      if (b - run_[low_].point.field_t > tol) {
        direction_ = RunDirection::up;
        extreme_ = i;
      } else if (run_[high_].point.field_t - b > tol) {
        direction_ = RunDirection::down;
        extreme_ = i;
      }
      if (b >= run_[high_].point.field_t) high_ = i;
      if (b <= run_[low_].point.field_t) low_ = i;
      return;
    }
    case RunDirection::up:
      if (b >= run_[extreme_].point.field_t - tol) {
        run_.push_back(h);
        if (b >= run_[extreme_].point.field_t) extreme_ = run_.size() - 1;
        return;
      }
      break;
    case RunDirection::down:
      if (b <= run_[extreme_].point.field_t + tol) {
        run_.push_back(h);
        if (b <= run_[extreme_].point.field_t) extreme_ = run_.size() - 1;
        return;
      }
      break;
  }
  reverse(h, out);
}

// The field has turned: the run ends at its extreme, the points after it
// begin the next run (less those still settling after the turn).
void SweepSegmenter::reverse(const Held& h, SegmentOutput& out) {
  const RunDirection next =
      direction_ == RunDirection::up ? RunDirection::down : RunDirection::up;
  const double turn_t = run_[extreme_].point.t_s;
  const double turn_field_t = run_[extreme_].point.field_t;
  close_run(extreme_ + 1, false, out);
  direction_ = next;
  run_origin_t_ = turn_field_t;

  const double until = turn_t + settle_s(h.point);
  start_settling(until, SettleReason::field_reversal);
  std::size_t settled = 0;
  while (settled < run_.size() && run_[settled].point.t_s < until) ++settled;
  counts_.settling.field_reversal += settled;
  run_.erase(run_.begin(), run_.begin() + static_cast<std::ptrdiff_t>(settled));
  if (h.point.t_s < until)
    ++counts_.settling.field_reversal;
  else
    run_.push_back(h);

  extreme_ = 0;
  for (std::size_t i = 1; i < run_.size(); ++i) {
    const double b = run_[i].point.field_t, e = run_[extreme_].point.field_t;
    if (next == RunDirection::up ? b >= e : b <= e) extreme_ = i;
  }
}

// Closes run_[0, end) (emitting it if it qualifies) and keeps the rest. A
// truncated close keeps nothing and forgets the direction.
void SweepSegmenter::close_run(std::size_t end, bool truncated, SegmentOutput& out) {
  if (end > 0) emit(0, end - 1, direction_, truncated, out);
  run_.erase(run_.begin(), run_.begin() + static_cast<std::ptrdiff_t>(end));
  run_origin_t_.reset();
  if (truncated) {
    direction_ = RunDirection::unknown;
    extreme_ = low_ = high_ = 0;
  }
}

void SweepSegmenter::emit(std::size_t first, std::size_t last, RunDirection dir, bool truncated,
                          SegmentOutput& out) {
  double reach_t = 0.0;
  for (std::size_t i = first; i <= last; ++i) reach_t = std::max(reach_t, std::abs(run_[i].point.field_t));
  const double half = half_span_t(reach_t);
  auto reject = [&](std::size_t& reason) {
    ++reason;
    if (truncated)
      ++counts_.truncated_discarded;
    else
      ++counts_.runs_short;
  };
  if (dir == RunDirection::unknown) {
    reject(counts_.rejected.no_direction);
    return;
  }
  // Trim to the traverse between the dwell at each end. For a down run the
  // same holds with the field's sign reversed.
  const double sign = dir == RunDirection::up ? 1.0 : -1.0;
  const double tol = tolerance_t_;
  auto f = [&](std::size_t i) { return sign * run_[i].point.field_t; };
  double lo = f(first), hi = f(first);
  for (std::size_t i = first; i <= last; ++i) {
    lo = std::min(lo, f(i));
    hi = std::max(hi, f(i));
  }
  std::size_t s = first;
  for (std::size_t i = first; i <= last; ++i)
    if (f(i) <= lo + tol) s = i;
  std::size_t e = last;
  for (std::size_t i = s; i <= last; ++i)
    if (f(i) >= hi - tol) {
      e = i;
      break;
    }
  counts_.dwell_points += (s - first) + (last - e);

  Sweep sw;
  sw.direction = dir == RunDirection::up ? Direction::up : Direction::down;
  sw.field_min_t = run_[s].point.field_t;
  sw.field_max_t = sw.field_min_t;
  for (std::size_t i = s; i <= e; ++i) {
    const auto& p = run_[i].point;
    sw.field_min_t = std::min(sw.field_min_t, p.field_t);
    sw.field_max_t = std::max(sw.field_max_t, p.field_t);
  }
  // Through zero: judged on the whole run, since the traverse starts at the
  // last point within the tolerance of its starting extreme, up to one
  // tolerance away from a start at zero.
  double run_min_t = sign > 0 ? lo : -hi, run_max_t = sign > 0 ? hi : -lo;
  if (run_origin_t_) {
    // A run begun at a reversal starts at the turn, though the points
    // settling after it are gone (a unipolar magnet turning at zero).
    run_min_t = std::min(run_min_t, *run_origin_t_);
    run_max_t = std::max(run_max_t, *run_origin_t_);
  }
  if (!(run_min_t <= tol && run_max_t >= -tol)) {
    reject(counts_.rejected.off_zero);
    return;
  }
  diagnostics_.largest_reach_t =
      std::max(diagnostics_.largest_reach_t, std::max(-sw.field_min_t, sw.field_max_t));
  const bool positive = sw.field_max_t >= half, negative = sw.field_min_t <= -half;
  if (!positive && !negative) {
    reject(counts_.rejected.below_span);
    return;
  }
  sw.sides = positive && negative ? Sides::two_sided : positive ? Sides::positive : Sides::negative;
  const std::size_t n = e - s + 1;
  if (n < options_.min_points) {
    reject(counts_.rejected.few_points);
    return;
  }
  // Points per tesla: a return swept much faster than the last sweep is
  // not one (a magnet that sweeps one way and returns fast).
  const double density = static_cast<double>(n) / std::max(sw.field_max_t - sw.field_min_t, 1e-300);
  if (last_sweep_density_ > 0.0 && density < options_.fast_return_density * last_sweep_density_) {
    reject(counts_.rejected.fast_returns);
    return;
  }
  last_sweep_density_ = density;

  TemperatureAccumulator acc;
  sw.points.reserve(n);
  for (std::size_t i = s; i <= e; ++i) {
    const auto& p = run_[i].point;
    sw.points.push_back(p);
    acc.add(p.temperature_k);
    if (p.overload) ++sw.n_overload;
  }
  sw.t_start_s = run_[s].point.t_s;
  sw.t_end_s = run_[e].point.t_s;
  sw.temperature = acc.stats();
  // The straight line T = mean + slope (t - t_mean), least squares.
  {
    double t_mean = 0.0;
    for (const auto& p : sw.points) t_mean += p.t_s;
    t_mean /= static_cast<double>(n);
    double sxx = 0.0, sxy = 0.0;
    for (const auto& p : sw.points) {
      sxx += (p.t_s - t_mean) * (p.t_s - t_mean);
      sxy += (p.t_s - t_mean) * (p.temperature_k - sw.temperature.mean_k);
    }
    const double slope = sxx > 0.0 ? sxy / sxx : 0.0;
    sw.temperature_drift_k = slope * (sw.t_end_s - sw.t_start_s);
    double ss = 0.0;
    for (const auto& p : sw.points) {
      const double r = p.temperature_k - sw.temperature.mean_k - slope * (p.t_s - t_mean);
      ss += r * r;
    }
    sw.temperature_residual_k = n > 2 ? std::sqrt(ss / static_cast<double>(n - 2)) : 0.0;
  }
  // Runs are numbered in time order, so first == last means one run. A
  // sweep across a run boundary whose own temperatures meet the plateau
  // criterion did not see a temperature change: the earlier run began on
  // the slow tail of a ramp and broke when the plateau settled (see the
  // header). It belongs to the run of its last point, which goes on.
  sw.temperature_run = run_[e].temperature_run;
  const bool one_run = run_[s].temperature_run == run_[e].temperature_run;
  const bool within_spread = sw.temperature.max_k - sw.temperature.min_k <=
                             options_.plateau.relative_spread * sw.temperature.mean_k;
  sw.temperature_unstable = !one_run && !within_spread;
  sw.truncated = truncated;
  // One-sided legs next to a two-sided sweep are the magnet's approach to
  // or return from it (see One-sided legs); a one-sided traverse waits for
  // the next to tell.
  const bool follows_two_sided = last_sides_ && *last_sides_ == Sides::two_sided;
  last_sides_ = sw.sides;
  if (sw.sides == Sides::two_sided) {
    if (pending_) {
      pending_.reset();
      ++counts_.rejected.approach_legs;
      ++counts_.runs_short;
    }
    deliver(std::move(sw), out);
    return;
  }
  if (follows_two_sided) {
    ++counts_.rejected.approach_legs;
    if (truncated)
      ++counts_.truncated_discarded;
    else
      ++counts_.runs_short;
    return;
  }
  if (pending_) deliver(std::move(*pending_), out);
  pending_ = std::move(sw);
}

void SweepSegmenter::deliver(Sweep&& sw, SegmentOutput& out) {
  sw.index = next_sweep_index_++;
  ++counts_.sweeps;
  if (sw.temperature_unstable) ++counts_.sweeps_temperature_unstable;
  if (sw.truncated) ++counts_.sweeps_truncated;
  out.sweeps.push_back(std::move(sw));
}

void SweepSegmenter::finish(SegmentOutput& out) {
  if (!run_.empty()) close_run(run_.size(), false, out);
  run_origin_t_.reset();
  if (pending_) deliver(std::move(*pending_), out);
  pending_.reset();
  direction_ = RunDirection::unknown;
  extreme_ = low_ = high_ = 0;
  const std::size_t before = out.plateaus.size();
  plateaus_.finish(out.plateaus);
  counts_.plateaus += out.plateaus.size() - before;
}

}  // namespace lphi::segment
