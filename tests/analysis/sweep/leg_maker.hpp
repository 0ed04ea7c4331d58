// For the sweep tests: one leg of a field sweep as an instrument records it,
// from the exact HLN function (analysis/magnetoconductance.hpp) and the
// faults a real cryostat adds, each with its known truth:
//   - a remanent field: the sample sees B_reading + remanent_t;
//   - a field reading that lags the magnet by reading_lag_s;
//   - a lock-in whose first-order filter (time constant tau_s) lags the
//     resistance, integrated exactly on 50 substeps per reading;
//   - Hall pickup linear in the field the sample sees;
//   - a gain drifting linearly in time (relative drift per second);
//   - Gaussian noise (analysis/synthetic.hpp's portable NormalSource).
// The expected centre of the leg follows analysis/field_axis.hpp's sign
// convention: -remanent - r lag + r tau on an up leg, -remanent + r lag - r tau
// on a down leg.
#pragma once

#include <cmath>
#include <cstdint>
#include <vector>

#include "analysis/constants.hpp"
#include "analysis/field_axis.hpp"
#include "analysis/magnetoconductance.hpp"
#include "analysis/synthetic.hpp"

namespace lphi::testing {

struct LegPlan {
  double lphi_m = 1e-6;
  double alpha = 1.0;
  double rsq0_ohm = 1000.0;
  double max_field_t = 0.02;       // the reading runs from -max to +max (or back)
  double min_field_t = -0.02;
  std::size_t n_points = 401;
  double noise_ohm = 0.0;
  std::uint64_t seed = 1;
  bool up = true;
  double rate_t_per_s = 5e-5;      // 3 mT/min
  double remanent_t = 0.0;
  double reading_lag_s = 0.0;
  double tau_s = 0.0;
  double hall_ohm_per_t = 0.0;
  double gain_drift_per_s = 0.0;   // relative gain change per second
  double t0_s = 0.0;
};

inline double sheet_resistance(const LegPlan& p, double sample_field_t) {
  const double ds = mc::hln2d(sample_field_t, p.alpha, p.lphi_m) * si::wl_conductance_s;
  return 1.0 / (1.0 / p.rsq0_ohm + ds) + p.hall_ohm_per_t * sample_field_t;
}

inline double expected_centre_t(const LegPlan& p) {
  const double lag = p.tau_s - p.reading_lag_s;
  return -p.remanent_t + (p.up ? 1.0 : -1.0) * p.rate_t_per_s * lag;
}

inline std::vector<field_axis::LegPoint> make_leg(const LegPlan& p) {
  std::vector<field_axis::LegPoint> leg;
  synthetic::NormalSource noise(p.seed);
  const double span = p.max_field_t - p.min_field_t;
  const double dt = span / static_cast<double>(p.n_points - 1) / p.rate_t_per_s;
  const double sign = p.up ? 1.0 : -1.0;
  const double start = p.up ? p.min_field_t : p.max_field_t;
  auto reading_at = [&](double t) { return start + sign * p.rate_t_per_s * (t - p.t0_s); };
  auto sample_field_at = [&](double t) { return reading_at(t + p.reading_lag_s) + p.remanent_t; };
  // The filter starts settled 20 time constants before the first reading.
  double t = p.t0_s - 20.0 * p.tau_s;
  double filtered = sheet_resistance(p, sample_field_at(t));
  for (std::size_t i = 0; i < p.n_points; ++i) {
    const double ti = p.t0_s + static_cast<double>(i) * dt;
    if (p.tau_s > 0.0) {
      const int sub = 50;
      const double h = (ti - t) / sub;
      for (int s = 0; s < sub; ++s) {
        // Exact for a drive linear across the substep (trapezoid of the drive
        // under the exponential kernel).
        const double a = sheet_resistance(p, sample_field_at(t));
        const double b = sheet_resistance(p, sample_field_at(t + h));
        const double e = std::exp(-h / p.tau_s);
        const double slope = (b - a) / h;
        filtered = b - slope * p.tau_s + (filtered - a + slope * p.tau_s) * e;
        t += h;
      }
    } else {
      filtered = sheet_resistance(p, sample_field_at(ti));
      t = ti;
    }
    const double gain = 1.0 + p.gain_drift_per_s * (ti - p.t0_s);
    leg.push_back({ti, reading_at(ti), filtered * gain + p.noise_ohm * noise.next()});
  }
  return leg;
}

}  // namespace lphi::testing
