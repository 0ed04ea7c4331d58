#include "drivers/sim/schedule.hpp"

#include <algorithm>
#include <cmath>
#include <iterator>

namespace lphi::sim {

void PiecewiseLinear::add(double t, double v) {
  t_.push_back(t);
  v_.push_back(v);
}

double PiecewiseLinear::at(double t) const {
  if (t_.empty()) return 0.0;
  if (t <= t_.front()) return v_.front();
  if (t >= t_.back()) return v_.back();
  // The last knot with t_i <= t; a step (two knots at one time) takes the later value.
  const auto upper = std::upper_bound(t_.begin(), t_.end(), t);
  const auto i = static_cast<std::size_t>(std::distance(t_.begin(), upper)) - 1;
  const double span = t_[i + 1] - t_[i];
  if (span <= 0.0) return v_[i + 1];
  return v_[i] + (v_[i + 1] - v_[i]) * (t - t_[i]) / span;
}

double PiecewiseLinear::next_value(double t) const {
  if (t_.empty()) return 0.0;
  const auto upper = std::upper_bound(t_.begin(), t_.end(), t);
  if (upper == t_.end()) return v_.back();
  return v_[static_cast<std::size_t>(std::distance(t_.begin(), upper))];
}

double PiecewiseLinear::slope(double t) const {
  if (t_.size() < 2 || t < t_.front() || t >= t_.back()) return 0.0;
  const auto upper = std::upper_bound(t_.begin(), t_.end(), t);
  const auto i = static_cast<std::size_t>(std::distance(t_.begin(), upper)) - 1;
  const double span = t_[i + 1] - t_[i];
  return span > 0.0 ? (v_[i + 1] - v_[i]) / span : 0.0;
}

double Schedule::field_rate_t_per_s(double t_s) const { return std::abs(field_.slope(t_s)); }

Schedule::Schedule(const Programme& p) {
  double t = 0.0;
  double temperature = p.start_temperature_k;
  temperature_.add(t, temperature);
  field_.add(t, 0.0);
  for (std::size_t i = 0; i < p.plateaus.size(); ++i) {
    const Plateau& q = p.plateaus[i];
    PlannedPlateau planned;
    planned.index = i;
    planned.temperature_k = q.temperature_k;
    planned.ramp_start_s = t;
    t += q.ramp_s;
    temperature_.add(t, q.temperature_k);
    planned.reached_s = t;
    t += q.dwell_s;
    field_.add(t, 0.0);
    planned.sweeps_start_s = t;
    const double sweep_s = (q.sweep_mode == SweepMode::unipolar ? 1.0 : 2.0) * q.max_field_t / q.rate_t_per_s;
    double from = 0.0;
    if (q.sweep_mode != SweepMode::unipolar) {
      t += q.max_field_t / q.rate_t_per_s;
      field_.add(t, -q.max_field_t);
      from = -q.max_field_t;
      planned.sweeps_start_s = t;
    }
    for (int k = 0; k < q.sweeps; ++k) {
      PlannedSweep s;
      s.plateau = i;
      s.index = k;
      s.start_s = t;
      s.from_t = from;
      switch (q.sweep_mode) {
        case SweepMode::both: s.to_t = -from; break;
        case SweepMode::up: s.to_t = q.max_field_t; break;
        case SweepMode::unipolar: s.to_t = from == 0.0 ? q.max_field_t : 0.0; break;
      }
      t += sweep_s;
      s.end_s = t;
      field_.add(t, s.to_t);
      sweeps_.push_back(s);
      from = s.to_t;
      if (q.sweep_mode == SweepMode::up && k + 1 < q.sweeps) {
        t += 2.0 * q.max_field_t / (kFastReturnFactor * q.rate_t_per_s);
        field_.add(t, -q.max_field_t);
        from = -q.max_field_t;
      }
    }
    planned.sweeps_end_s = t;
    if (from != 0.0) {
      t += std::abs(from) / q.rate_t_per_s;
      field_.add(t, 0.0);
    }
    temperature_.add(t, q.temperature_k);
    planned.end_s = t;
    plateaus_.push_back(planned);
    temperature = q.temperature_k;
  }
  end_s_ = t;
}

}  // namespace lphi::sim
