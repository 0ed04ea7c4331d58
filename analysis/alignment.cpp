#include "analysis/alignment.hpp"

#include <algorithm>
#include <cmath>
#include <vector>

namespace lphi::align {

std::string validate(const AlignerOptions& o) {
  auto positive = [](double v) { return std::isfinite(v) && v > 0.0; };
  if (!positive(o.max_age_temperature_s))
    return "max_age_temperature_s must be finite and > 0";
  if (o.max_age_field_s && !positive(*o.max_age_field_s))
    return "max_age_field_s must be finite and > 0 (or unset: automatic)";
  if (!positive(o.field_age_intervals)) return "field_age_intervals must be finite and > 0";
  if (!positive(o.field_age_floor_s) || !positive(o.field_age_cap_s) ||
      o.field_age_floor_s > o.field_age_cap_s)
    return "field_age_floor_s and field_age_cap_s must be finite, > 0 and floor <= cap";
  if (!positive(o.max_hold_s) || o.max_hold_s < o.max_age_temperature_s ||
      o.max_hold_s < o.max_age_field_s.value_or(o.field_age_floor_s))
    return "max_hold_s must be finite and at least both max ages (field_age_floor_s when automatic)";
  if (o.max_pending < 1) return "max_pending must be at least 1";
  if (o.max_buffered < 2) return "max_buffered must be at least 2 (one reading on each side)";
  return {};
}

double max_age_field_bound_s(const AlignerOptions& o) {
  return o.max_age_field_s ? *o.max_age_field_s : std::min(o.field_age_cap_s, o.max_hold_s);
}

double FieldEstimates::median(const std::deque<double>& values) {
  std::vector<double> v(values.begin(), values.end());
  const auto mid = v.begin() + static_cast<std::ptrdiff_t>(v.size() / 2);
  std::nth_element(v.begin(), mid, v.end());
  return *mid;
}

void FieldEstimates::add(double t_s, double field_t) {
  if (n_ >= 1 && !(t_s > t_[1])) return;  // a repeated time carries no interval
  if (n_ >= 1) {
    intervals_.push_back(t_s - t_[1]);
    if (intervals_.size() > rolling_window) intervals_.pop_front();
    interval_ = median(intervals_);
  }
  if (n_ >= 2) {
    // The residual of the middle reading from the chord of its neighbours,
    // normalised to the noise of one reading (see Field noise).
    const double w = (t_[1] - t_[0]) / (t_s - t_[0]);
    const double r = b_[1] - (b_[0] + (field_t - b_[0]) * w);
    residuals_.push_back(std::abs(r) / std::sqrt(1.0 + w * w + (1.0 - w) * (1.0 - w)));
    if (residuals_.size() > rolling_window) residuals_.pop_front();
    if (residuals_.size() >= 8) noise_ = 1.4826 * median(residuals_);
  }
  t_[0] = t_[1];
  b_[0] = b_[1];
  t_[1] = t_s;
  b_[1] = field_t;
  ++n_;
}

double Aligner::field_age_limit_s(double median_interval_s) const {
  if (options_.max_age_field_s) return *options_.max_age_field_s;
  return std::clamp(options_.field_age_intervals * median_interval_s, options_.field_age_floor_s,
                    max_age_field_bound_s(options_));
}

Aligner::Aligner(const AlignerOptions& options) : options_(options), error_(validate(options)) {}

void Aligner::push(const LockinReading& r, std::vector<AlignedPoint>& out) {
  ++counts_.lockin_received;
  const bool finite = std::isfinite(r.t_s) && std::isfinite(r.x_v) && std::isfinite(r.y_v) &&
                      std::isfinite(r.range_v) && std::isfinite(r.time_constant_s);
  if (!error_.empty() || !finite || r.range_v < 0.0 || r.time_constant_s < 0.0) {
    ++counts_.refused_lockin;
    return;
  }
  if (seen_lockin_ && r.t_s < last_lockin_t_) {
    ++counts_.out_of_order_lockin;
    return;
  }
  seen_lockin_ = true;
  last_lockin_t_ = r.t_s;
  pending_.push_back(r);
  release(out);
}

void Aligner::push(const TemperatureReading& r, std::vector<AlignedPoint>& out) {
  if (!error_.empty() || !std::isfinite(r.t_s) || !std::isfinite(r.temperature_k) ||
      r.temperature_k <= 0.0) {
    ++counts_.refused_temperature;
    return;
  }
  if (seen_temperature_ && r.t_s <= last_temperature_t_) {
    ++counts_.out_of_order_temperature;
    return;
  }
  seen_temperature_ = true;
  last_temperature_t_ = r.t_s;
  keep(temperature_, {r.t_s, r.temperature_k, 0.0, 0.0}, counts_.dropped_temperature);
  release(out);
}

void Aligner::push(const FieldReading& r, std::vector<AlignedPoint>& out) {
  if (!error_.empty() || !std::isfinite(r.t_s) || !std::isfinite(r.field_t)) {
    ++counts_.refused_field;
    return;
  }
  if (seen_field_ && r.t_s <= last_field_t_) {
    ++counts_.out_of_order_field;
    return;
  }
  seen_field_ = true;
  last_field_t_ = r.t_s;
  field_estimates_.add(r.t_s, r.field_t);
  field_stats_.median_interval_s = field_estimates_.median_interval_s();
  field_stats_.age_limit_s = field_age_limit_s(field_stats_.median_interval_s);
  field_stats_.noise_t = field_estimates_.noise_t();
  keep(field_, {r.t_s, r.field_t, field_stats_.age_limit_s, field_stats_.noise_t}, counts_.dropped_field);
  release(out);
}

void Aligner::flush(std::vector<AlignedPoint>& out) {
  while (!pending_.empty()) decide_front(out);
}

void Aligner::keep(std::deque<Sample>& buffer, Sample s, std::size_t& dropped) {
  buffer.push_back(s);
  // Every later lock-in reading is at or after the oldest held one (or, with
  // none held, the last one seen), so readings before that are not needed.
  if (!pending_.empty())
    trim(buffer, pending_.front().t_s);
  else if (seen_lockin_)
    trim(buffer, last_lockin_t_);
  while (buffer.size() > options_.max_buffered) {
    buffer.pop_front();
    ++dropped;
  }
}

// Decides held readings in time order: those whose neighbours are final,
// then those forced out by the hold time or the capacity.
void Aligner::release(std::vector<AlignedPoint>& out) {
  while (!pending_.empty()) {
    const double t = pending_.front().t_s;
    const bool ready = seen_temperature_ && last_temperature_t_ >= t && seen_field_ &&
                       last_field_t_ >= t;
    const bool held_too_long = last_lockin_t_ - t > options_.max_hold_s;
    const bool too_many = pending_.size() > options_.max_pending;
    if (!ready && !held_too_long && !too_many) break;
    if (!ready) {
      if (too_many)
        ++counts_.decided_by_capacity;
      else
        ++counts_.decided_by_hold;
    }
    decide_front(out);
  }
}

void Aligner::trim(std::deque<Sample>& buffer, double frontier_t_s) {
  while (buffer.size() >= 2 && buffer[1].t_s <= frontier_t_s) buffer.pop_front();
}

// After trim(buffer, t), buffer[0] is the last reading at or before t (if
// any is) and buffer[1] the first after it.
Aligner::Lookup Aligner::interpolate(std::deque<Sample>& buffer, double t_s, double max_age_s) {
  trim(buffer, t_s);
  Lookup found;
  if (buffer.empty() || buffer[0].t_s > t_s) return found;
  const Sample& a = buffer[0];
  found.noise = a.noise;
  if (a.t_s == t_s) {
    found.ok = true;
    found.exact = true;
    found.value = a.value;
    return found;
  }
  if (buffer.size() < 2) return found;
  const Sample& b = buffer[1];
  const double age_s = max_age_s >= 0.0 ? max_age_s : b.age_limit_s;
  if (t_s - a.t_s > age_s || b.t_s - t_s > age_s) return found;
  found.ok = true;
  found.value = a.value + (b.value - a.value) * (t_s - a.t_s) / (b.t_s - a.t_s);
  return found;
}

void Aligner::decide_front(std::vector<AlignedPoint>& out) {
  const LockinReading r = pending_.front();
  pending_.pop_front();
  const Lookup temperature = interpolate(temperature_, r.t_s, options_.max_age_temperature_s);
  const Lookup field = interpolate(field_, r.t_s, -1.0);
  if (!temperature.ok || !field.ok) {
    ++counts_.unused;
    if (!temperature.ok) ++counts_.missing_temperature;
    if (!field.ok) ++counts_.missing_field;
    return;
  }
  ++counts_.aligned;
  AlignedPoint p;
  p.t_s = r.t_s;
  p.x_v = r.x_v;
  p.y_v = r.y_v;
  p.temperature_k = temperature.value;
  p.field_t = field.value;
  p.range_v = r.range_v;
  p.time_constant_s = r.time_constant_s;
  p.overload = r.overload;
  p.temperature_exact = temperature.exact;
  p.field_exact = field.exact;
  p.field_noise_t = field.noise;
  out.push_back(p);
}

}  // namespace lphi::align
