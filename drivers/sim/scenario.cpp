#include "drivers/sim/scenario.hpp"

#include <fmt/format.h>
#include <cmath>
#include <cstdio>

#include "drivers/sim/schedule.hpp"
#include "schema/protocol/limits.hpp"

namespace lphi::sim {
namespace {

using protocol::limits::non_negative;
using protocol::limits::positive;

std::string num(double x) { return fmt::format("{:g}", x); }

}  // namespace

const char* sweep_mode_name(SweepMode m) {
  switch (m) {
    case SweepMode::both: return "both";
    case SweepMode::up: return "up";
    case SweepMode::unipolar: return "unipolar";
  }
  return "?";
}

std::string scenario_error(const Scenario& s) {
  if (auto e = sample_error(s.sample); !e.empty()) return "sample: " + e;
  if (auto e = dephasing_error(s.dephasing); !e.empty()) return "dephasing: " + e;
  const LockinSettings& l = s.lockin;
  if (!positive(l.current_a)) return "lockin: current_a must be positive (got " + num(l.current_a) + ")";
  if (!positive(l.gain)) return "lockin: gain must be positive (got " + num(l.gain) + ")";
  if (!non_negative(l.quadrature_fraction)) return "lockin: quadrature_fraction must be >= 0";
  if (!positive(l.frequency_hz)) return "lockin: frequency_hz must be positive";
  if (!positive(l.range_v)) return "lockin: range_v must be positive";
  if (!non_negative(l.time_constant_s)) return "lockin: time_constant_s must be >= 0";
  if (!positive(s.thermometer.r0_ohm) || !positive(s.thermometer.t0_k))
    return "thermometer: r0_ohm and t0_k must be positive";
  if (!positive(s.magnet.limit_t) || !positive(s.magnet.max_rate_t_per_s))
    return "magnet: limit_t and max_rate_t_per_s must be positive";
  const NoiseLevels& n = s.noise;
  if (!positive(n.sample_interval_s)) return "noise: sample_interval_s must be positive";
  if (!non_negative(n.lockin_x_v) || !non_negative(n.lockin_y_v) ||
      !non_negative(n.temperature_rel) || !non_negative(n.field_t))
    return "noise: levels must be finite and >= 0";
  if (!(n.temperature_rel < 0.1)) return "noise: temperature_rel must be below 0.1";
  if (!positive(s.programme.start_temperature_k))
    return "programme: start_temperature_k must be positive";
  if (s.programme.plateaus.empty()) return "programme: at least one [[programme.plateau]] is needed";
  for (std::size_t i = 0; i < s.programme.plateaus.size(); ++i) {
    const Plateau& p = s.programme.plateaus[i];
    const std::string where = "programme.plateau[" + std::to_string(i) + "]: ";
    if (!positive(p.temperature_k)) return where + "temperature_k must be positive";
    if (!non_negative(p.ramp_s) || !non_negative(p.dwell_s))
      return where + "ramp_s and dwell_s must be >= 0";
    if (p.sweeps < 0) return where + "sweeps must be >= 0";
    if (!positive(p.max_field_t) || p.max_field_t > s.magnet.limit_t)
      return where + "max_field_t must be positive and at most magnet.limit_t";
    if (!positive(p.rate_t_per_s) || p.rate_t_per_s > s.magnet.max_rate_t_per_s)
      return where + "rate_t_per_s must be positive and at most magnet.max_rate_t_per_s";
    if (p.sweep_mode == SweepMode::up && p.rate_t_per_s * kFastReturnFactor > s.magnet.max_rate_t_per_s)
      return where + "sweep_mode up returns at " + num(kFastReturnFactor) + " x rate_t_per_s = " +
             num(p.rate_t_per_s * kFastReturnFactor) + " T/s, above magnet.max_rate_t_per_s";
  }
  const Faults& f = s.faults;
  for (const auto& d : f.dropouts)
    if (!non_negative(d.start_s) || !positive(d.duration_s))
      return "fault lockin-dropout: start_s >= 0 and duration_s > 0 are needed";
  for (const auto& w : f.stuck)
    if (!non_negative(w.start_s) || !positive(w.duration_s))
      return "fault thermometer-stuck: start_s >= 0 and duration_s > 0 are needed";
  for (const auto& r : f.ranges)
    if (!non_negative(r.start_s) || !positive(r.duration_s) || !positive(r.range_v))
      return "fault lockin-range: start_s >= 0, duration_s > 0 and range_v > 0 are needed";
  for (const auto& q : f.pickups)
    if (!non_negative(q.start_s) || !positive(q.duration_s) || !non_negative(q.fraction))
      return "fault quadrature-pickup: start_s >= 0, duration_s > 0 and fraction >= 0 are needed";
  for (const auto& e : f.excursions)
    if (!non_negative(e.start_s) || !positive(e.duration_s) || !positive(e.amplitude_k))
      return "fault temperature-excursion: start_s >= 0, duration_s > 0 and amplitude_k > 0 are needed";
  for (const auto& w : f.open_contacts)
    if (!non_negative(w.start_s) || !positive(w.duration_s))
      return "fault open-contact: start_s >= 0 and duration_s > 0 are needed";
  for (const auto& r : f.resets)
    if (!non_negative(r.at_s) || !non_negative(r.period_s))
      return "fault connection-reset: at_s and period_s must be >= 0";
  for (const auto& r : f.remanences)
    if (!std::isfinite(r.field_t) || std::abs(r.field_t) > 0.1 || !non_negative(r.start_s))
      return "fault remanent-field: field_t must be within +-0.1 T (got " + num(r.field_t) +
             ") and start_s >= 0";
  if (!non_negative(f.field_lag_s) || f.field_lag_s > 60.0)
    return "fault field-reading-lag: delay_s must be 0..60 (got " + num(f.field_lag_s) + ")";
  for (const auto& c : f.time_constants)
    if (!non_negative(c.start_s) || !non_negative(c.duration_s) || !positive(c.time_constant_s) ||
        c.time_constant_s > 1000.0)
      return "fault lockin-time-constant: start_s >= 0, duration_s >= 0 (0: to the end) and "
             "time_constant_s in (0, 1000] are needed (got " + num(c.time_constant_s) + ")";
  for (const auto& h : f.holes)
    if (!non_negative(h.start_s) || !non_negative(h.duration_s) || !std::isfinite(h.from_t) ||
        !std::isfinite(h.to_t) || !(h.from_t < h.to_t))
      return "fault lockin-hole: start_s >= 0, duration_s >= 0 (0: to the end) and from_t < to_t "
             "are needed (got from_t " + num(h.from_t) + ", to_t " + num(h.to_t) + ")";
  if (!std::isfinite(f.plateau_drift_relative) || std::abs(f.plateau_drift_relative) >= 0.5)
    return "fault plateau-drift: relative must be within +-0.5 (got " +
           num(f.plateau_drift_relative) + ")";
  if (!std::isfinite(f.gain_drift_per_hour) || std::abs(f.gain_drift_per_hour) >= 1.0 ||
      !non_negative(f.gain_drift_start_s))
    return "fault gain-drift: per_hour must be within +-1 (got " + num(f.gain_drift_per_hour) +
           ") and start_s >= 0";
  if (f.gain_drift_per_hour < 0.0) {
    const double hours = (Schedule(s.programme).end_s() - f.gain_drift_start_s) / 3600.0;
    if (1.0 + f.gain_drift_per_hour * hours < 0.5)
      return "fault gain-drift: per_hour " + num(f.gain_drift_per_hour) +
             " would halve the gain before the programme ends";
  }
  if (!non_negative(f.spike_probability) || f.spike_probability > 0.1 ||
      !non_negative(f.spike_size_sigma))
    return "fault spikes: probability must be 0..0.1 (got " + num(f.spike_probability) +
           ") and size_sigma >= 0";
  if (f.spike_probability > 0.0 && !positive(s.noise.lockin_x_v * f.spike_size_sigma))
    return "fault spikes: size_sigma > 0 and noise.lockin_x_v > 0 are needed (a spike is "
           "size_sigma times the X noise)";
  if (f.heating && (!non_negative(f.heating_start_s) || !non_negative(f.heating_duration_s) ||
                    !positive(f.heating_floor_k) || !positive(f.heating_exponent)))
    return "fault electron-heating: start_s >= 0, duration_s >= 0 (0: to the end), floor_k > 0 and "
           "exponent > 0 are needed";
  for (int p : s.ports)
    if (p < 0 || p > 65535) return "ports: a port must be 0..65535";
  return {};
}

}  // namespace lphi::sim
