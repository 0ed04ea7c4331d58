// A synthetic cooldown for the live-analysis tests: temperature plateaus,
// at each an up and a down field sweep, the lock-in's X from lphi's own
// forward models (analysis/synthetic.hpp), in the three streams a sample's
// instruments would send.
//
// Truth (chosen for the tests, not measured):
//   L_phi(T) = lphi_ref_m (T / t_ref_k)^(-p/2), or with saturation
//   L_phi^-2 = L_sat^-2 + b T^p;
//   sigma(0, T) = sigma_ref + G0 [ -alpha ln(L_phi(T)^2 / L_phi(t_ref)^2)
//                                  + kappa_int ln(T / t_ref) ],
//   G0 = e^2/(pi h) (the 2D form of analysis/PHYSICS.md, "Zero-field
//   temperature dependence": weak localization plus interaction, electrons
//   at T).
#pragma once

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <vector>

#include "analysis/alignment.hpp"
#include "analysis/synthetic.hpp"

namespace lphi::live::testing {

struct CooldownPlan {
  std::vector<double> plateaus_k = {1.0, 0.7, 0.5, 0.35, 0.25, 0.18, 0.13, 0.1};
  double t0_s = 1.7e9;           // Unix-like epoch times
  double lockin_dt_s = 0.1;      // lock-in and magnet at 10 Hz
  double thermometer_dt_s = 1.0; // thermometer at 1 Hz
  double ramp_s = 60.0;          // temperature ramp between plateaus
  double settle_s = 20.0;        // dwell before the first sweep of a plateau
  double end_dwell_s = 10.0;     // at each end of a sweep
  std::size_t sweep_points = 1601;
  double max_field_t = 0.1;
  double noise_rsq_ohm = 0.3;
  double lphi_ref_m = 120e-9;    // at t_ref_k
  double t_ref_k = 0.5;
  double p = 1.0;
  double lsat_m = 0.0;           // 0: no saturation
  double alpha = 1.0;
  double kappa_int = 0.75;       // interaction slope 1 - 3F/4 for F = 1/3
  double sigma_ref_s = 1e-3;
  double squares = 5.0;
  double excitation_a = 10e-9;
  double gain = 100.0;
  double time_constant_s = 0.1;
  // After the last sweep, the magnet turns back by this much (a live
  // analysis knows a sweep is complete only when the field reverses).
  double closing_ramp_t = 0.0;
};

struct Cooldown {
  std::vector<align::LockinReading> lockin;
  std::vector<align::TemperatureReading> thermometer;
  std::vector<align::FieldReading> field;
  std::vector<double> sweep_temperature_k;  // one per sweep, in order
};

inline double truth_lphi_m(const CooldownPlan& c, double t_k) {
  const double b = std::pow(c.lphi_ref_m, -2.0) * std::pow(c.t_ref_k, -c.p);  // b T_ref^p = L_ref^-2
  const double inv2 = b * std::pow(t_k, c.p) + (c.lsat_m > 0.0 ? std::pow(c.lsat_m, -2.0) : 0.0);
  return 1.0 / std::sqrt(inv2);
}

inline double truth_sigma0_s(const CooldownPlan& c, double t_k) {
  // e^2/(pi h) from the exact SI 2019 values of e and h (CODATA).
  const double e = 1.602176634e-19, h = 6.62607015e-34;
  const double g0 = e * e / (3.141592653589793 * h);
  const double l = truth_lphi_m(c, t_k), l_ref = truth_lphi_m(c, c.t_ref_k);
  return c.sigma_ref_s + g0 * (-c.alpha * std::log(l * l / (l_ref * l_ref)) +
                               c.kappa_int * std::log(t_k / c.t_ref_k));
}

inline Cooldown make_cooldown(const CooldownPlan& c) {
  Cooldown out;
  double t = c.t0_s;
  double t_next_thermometer = c.t0_s;
  double temperature = c.plateaus_k.front();
  double field = -c.max_field_t;
  std::uint64_t seed = 11;
  // x for a sheet resistance: X = R_sq N I gain
  auto x_of = [&](double rsq) { return rsq * c.squares * c.excitation_a * c.gain; };
  double rsq_now = 1.0 / truth_sigma0_s(c, temperature);
  auto emit = [&](double rsq, double field_t, double temperature_k) {
    while (t_next_thermometer <= t) {
      out.thermometer.push_back({t_next_thermometer, temperature_k});
      t_next_thermometer += c.thermometer_dt_s;
    }
    out.lockin.push_back({t, x_of(rsq), 0.01 * x_of(rsq), 0.0, c.time_constant_s, false});
    out.field.push_back({t, field_t});
    t += c.lockin_dt_s;
  };
  auto dwell = [&](double seconds, double t_from_k, double t_to_k) {
    const auto n = static_cast<std::size_t>(std::lround(seconds / c.lockin_dt_s));
    for (std::size_t i = 0; i < n; ++i) {
      const double f = n > 1 ? static_cast<double>(i) / static_cast<double>(n - 1) : 1.0;
      temperature = t_from_k + (t_to_k - t_from_k) * f;
      emit(rsq_now, field, temperature);
    }
  };
  for (std::size_t k = 0; k < c.plateaus_k.size(); ++k) {
    const double tk = c.plateaus_k[k];
    if (k > 0) dwell(c.ramp_s, temperature, tk);
    temperature = tk;
    dwell(c.settle_s, tk, tk);
    synthetic::SweepTruth truth;
    truth.model = mc::Model::hln2d;
    truth.lphi_m = truth_lphi_m(c, tk);
    truth.alpha = c.alpha;
    truth.rsq0_ohm = 1.0 / truth_sigma0_s(c, tk);
    synthetic::SweepPlan plan;
    plan.max_field_t = c.max_field_t;
    plan.n_points = c.sweep_points;
    plan.noise_rsq_ohm = c.noise_rsq_ohm;
    for (int direction = 0; direction < 2; ++direction) {
      plan.seed = seed++;
      auto points = synthetic::make_sweep(truth, plan);
      if (direction == 1) std::reverse(points.begin(), points.end());
      for (const auto& p : points) {
        field = p.field_t;
        emit(p.rsq_ohm, field, tk);
      }
      rsq_now = points.back().rsq_ohm;
      out.sweep_temperature_k.push_back(tk);
      dwell(c.end_dwell_s, tk, tk);
    }
  }
  const double direction = field > 0.0 ? -1.0 : 1.0;
  for (double moved = 0.0; moved < c.closing_ramp_t; moved += 1e-3) {
    field += direction * 1e-3;
    emit(rsq_now, field, temperature);
  }
  return out;
}

}  // namespace lphi::live::testing
