// A small recorded cooldown for the tests of `lphi replay`: temperature
// plateaus, at each an up and a down field sweep whose sheet resistance comes
// from lphi's forward model (analysis/synthetic.hpp), written as the CSV
// that `lphi replay` reads (daemon/client/recording_csv.hpp). Ten rows per
// second; the thermometer reads on every tenth row (its other cells are
// empty, as in a real recording of a slower thermometer).
//
// Truth (chosen for the tests, not measured): L_phi(T) = lphi_ref_m *
// (T / t_ref_k)^(-1/2), i.e. p = 1; R_sq(B = 0) = rsq_ohm at every T.
// The lock-in reads X = R_sq * squares * excitation_a * gain (the relation
// analysis/conductance.hpp inverts) and Y = X / 100.
#pragma once

#include <algorithm>
#include <cmath>
#include <fmt/format.h>
#include <iterator>
#include <string>
#include <vector>

#include "analysis/synthetic.hpp"

namespace lphi::testing {

struct RecordingPlan {
  std::vector<double> plateaus_k = {0.5, 0.3, 0.18};
  double dt_s = 0.1;
  int thermometer_every = 10;
  double settle_s = 40.0;  // at each plateau before its first sweep
  double ramp_s = 30.0;    // between plateaus
  double dwell_s = 10.0;   // after each sweep
  double tail_s = 20.0;    // the field's return to zero at the end
  std::size_t sweep_points = 801;
  double max_field_t = 0.1;
  double noise_rsq_ohm = 0.02;
  double lphi_ref_m = 150e-9;
  double t_ref_k = 0.5;
  double rsq_ohm = 1000.0;
  // The sample as the daemon's config must describe it.
  double squares = 5.0;
  double excitation_a = 10e-9;
  double gain = 100.0;
  double time_constant_s = 0.1;
};

inline double truth_lphi_m(const RecordingPlan& plan, double t_k) {
  return plan.lphi_ref_m * std::pow(t_k / plan.t_ref_k, -0.5);
}

// The CSV text; `rows` gets the number of data rows.
inline std::string make_recording_csv(const RecordingPlan& plan, std::size_t* rows = nullptr) {
  std::string csv = "time_s,temperature_k,field_t,lockin_x_v,lockin_y_v,lockin_time_constant_s\n";
  std::size_t k = 0;
  double field = -plan.max_field_t;
  double rsq = plan.rsq_ohm;
  auto emit = [&](double temperature_k) {
    const double x = rsq * plan.squares * plan.excitation_a * plan.gain;
    const double t = static_cast<double>(k) * plan.dt_s;
    if (k % static_cast<std::size_t>(plan.thermometer_every) == 0) {
      fmt::format_to(std::back_inserter(csv), "{:.1f},{:.6g},{:.9g},{:.12g},{:.12g},{:g}\n", t, temperature_k, field,
                     x, x / 100.0, plan.time_constant_s);
    } else {
      fmt::format_to(std::back_inserter(csv), "{:.1f},,{:.9g},{:.12g},{:.12g},{:g}\n", t, field, x, x / 100.0,
                     plan.time_constant_s);
    }
    ++k;
  };
  auto hold = [&](double seconds, double from_k, double to_k) {
    const auto n = static_cast<std::size_t>(std::lround(seconds / plan.dt_s));
    for (std::size_t i = 0; i < n; ++i) {
      const double f = n > 1 ? static_cast<double>(i) / static_cast<double>(n - 1) : 1.0;
      emit(from_k + (to_k - from_k) * f);
    }
  };
  std::uint64_t seed = 5;
  for (std::size_t p = 0; p < plan.plateaus_k.size(); ++p) {
    const double tk = plan.plateaus_k[p];
    if (p > 0) hold(plan.ramp_s, plan.plateaus_k[p - 1], tk);
    hold(plan.settle_s, tk, tk);
    synthetic::SweepTruth truth;
    truth.model = mc::Model::hln2d;
    truth.lphi_m = truth_lphi_m(plan, tk);
    truth.alpha = 1.0;
    truth.rsq0_ohm = plan.rsq_ohm;
    synthetic::SweepPlan sweep;
    sweep.max_field_t = plan.max_field_t;
    sweep.n_points = plan.sweep_points;
    sweep.noise_rsq_ohm = plan.noise_rsq_ohm;
    for (int direction = 0; direction < 2; ++direction) {
      sweep.seed = seed++;
      auto points = synthetic::make_sweep(truth, sweep);
      if (direction == 1) std::reverse(points.begin(), points.end());
      for (const auto& point : points) {
        field = point.field_t;
        rsq = point.rsq_ohm;
        emit(tk);
      }
      hold(plan.dwell_s, tk, tk);
    }
  }
  // The magnet returns towards zero: the field turns back, which ends the
  // last sweep (a sweep is known to be over only when the field turns).
  const auto tail = static_cast<std::size_t>(std::lround(plan.tail_s / plan.dt_s));
  const double top = field;
  for (std::size_t i = 1; i <= tail; ++i) {
    field = top * (1.0 - static_cast<double>(i) / static_cast<double>(tail));
    emit(plan.plateaus_k.back());
  }
  if (rows != nullptr) *rows = k;
  return csv;
}

}  // namespace lphi::testing
