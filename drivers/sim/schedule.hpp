// The cooldown programme laid out in simulated time. For each plateau: the
// temperature ramps linearly from the previous plateau's value over ramp_s,
// stays there for dwell_s at zero field, then the magnet sweeps at the
// plateau's rate as its sweep_mode says:
//   both:     0 -> -B_max, `sweeps` sweeps alternately -B_max -> +B_max and
//             +B_max -> -B_max, back to 0;
//   up:       0 -> -B_max, `sweeps` sweeps -B_max -> +B_max, each but the
//             last followed by a return +B_max -> -B_max at kFastReturnFactor
//             times the rate (not a sweep), back to 0;
//   unipolar: `sweeps` legs alternately 0 -> +B_max and +B_max -> 0 from
//             zero field, back to 0 if the last leg ends at +B_max.
// The next plateau starts then.
// Pure: a Schedule is immutable after construction and safe to share.
#pragma once

#include <cstddef>
#include <vector>

#include "drivers/sim/scenario.hpp"

namespace lphi::sim {

// Piecewise-linear function of time through (t_i, v_i), t strictly
// increasing; constant before the first and after the last knot.
class PiecewiseLinear {
 public:
  void add(double t, double v);  // t >= the last knot's t (an equal t makes a step)
  double at(double t) const;
  double next_value(double t) const;   // the value at the first knot after t (the last if none)
  double slope(double t) const;        // 0 outside the knots
  double end_s() const { return t_.empty() ? 0.0 : t_.back(); }
 private:
  std::vector<double> t_, v_;
};

struct PlannedSweep {
  std::size_t plateau = 0;
  int index = 0;           // within the plateau, from 0
  double start_s = 0.0, end_s = 0.0;
  double from_t = 0.0, to_t = 0.0;
};

struct PlannedPlateau {
  std::size_t index = 0;
  double temperature_k = 0.0;
  double ramp_start_s = 0.0;   // the temperature starts to change
  double reached_s = 0.0;      // the temperature is at the plateau value
  double end_s = 0.0;          // the field is back at 0
  double sweeps_start_s = 0.0; // the first sweep starts (reached_s + dwell when none)
  double sweeps_end_s = 0.0;   // the last sweep ends
};

class Schedule {
 public:
  explicit Schedule(const Programme& p);
  double temperature_k(double t_s) const { return temperature_.at(t_s); }
  double field_t(double t_s) const { return field_.at(t_s); }
  double field_target_t(double t_s) const { return field_.next_value(t_s); }
  double field_rate_t_per_s(double t_s) const;   // |dB/dt|
  const std::vector<PlannedSweep>& sweeps() const { return sweeps_; }
  const std::vector<PlannedPlateau>& plateaus() const { return plateaus_; }
  double end_s() const { return end_s_; }
 private:
  PiecewiseLinear temperature_, field_;
  std::vector<PlannedSweep> sweeps_;
  std::vector<PlannedPlateau> plateaus_;
  double end_s_ = 0.0;
};

}  // namespace lphi::sim
