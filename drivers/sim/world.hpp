// The simulated cryostat as functions of simulated time: bath and electron
// temperature, field, the sample's sheet conductance, and what each
// instrument reads. Given a scenario and a seed every reading is a pure
// function of the simulated time (and of the lock-in settings and any
// manual magnet commands), so a run is reproducible whatever the polling
// pattern: noise is drawn per noise interval from a hash of (seed, channel,
// interval index) through analysis/synthetic.hpp's NormalSource.
//
// Not thread-safe: one World belongs to one thread (lphi-sim's io_context).
#pragma once

#include <cstdint>
#include <utility>
#include <vector>

#include "drivers/sim/scenario.hpp"
#include "drivers/sim/schedule.hpp"

namespace lphi::sim {

// The magnet supply's field: the programme's by default; a set command
// (target, rate) takes it over ("manual") from the field it had, ramping
// linearly, until the programme is resumed (the field then follows the
// programme again at once).
class Magnet {
 public:
  explicit Magnet(const Schedule& schedule) : schedule_(&schedule) {}
  double field_t(double t_s) const;
  double target_t(double t_s) const;
  double rate_t_per_s(double t_s) const;
  bool manual() const { return !segments_.empty() && segments_.back().manual; }
  void set_target(double t_now_s, double target_t, double rate_t_per_s);
  void resume_programme(double t_now_s);
  // Whether the field was under manual control at any time in [t0, t1].
  bool manual_during(double t0_s, double t1_s) const;
 private:
  struct Segment {
    double start_s = 0.0;
    bool manual = false;
    double from_t = 0.0, target_t = 0.0, rate_t_per_s = 0.0;
  };
  const Segment* segment_at(double t_s) const;
  const Schedule* schedule_;
  std::vector<Segment> segments_;          // bounded, oldest dropped
  std::vector<std::pair<double, double>> manual_spans_;  // bounded, oldest dropped
};

struct LockinReading {
  double x_v = 0.0;
  double y_v = 0.0;
  bool overload = false;
};

struct ThermometerReading {
  double temperature_k = 0.0;
  double resistance_ohm = 0.0;
};

// The truth of one stretch of the programme, at the stretch's midpoint.
struct Truth {
  double at_s = 0.0;
  double temperature_k = 0.0;
  double electron_temperature_k = 0.0;
  double lphi_m = 0.0;
  double sigma0_s = 0.0;        // sheet conductance at B = 0
  bool heating = false;
  bool manual_field = false;    // the magnet was taken over during the stretch
  // Faults in effect, also at the midpoint unless said otherwise.
  double field_offset_t = 0.0;  // remanent field: true field - the magnet's own field
  double field_lag_s = 0.0;     // the reading shows the field this long ago
  double lockin_time_constant_s = 0.0;  // the lock-in's, with a time-constant fault's
  double gain_factor = 1.0;     // the lock-in gain's drift factor
  double temperature_start_k = 0.0;     // bath at the stretch's start and end
  double temperature_end_k = 0.0;
  bool lockin_hole = false;     // a lockin-hole fault's window overlaps the stretch
  double hole_from_t = 0.0, hole_to_t = 0.0;  // its field range, when lockin_hole
};

enum class NoiseChannel : std::uint64_t { lockin_x = 1, lockin_y, temperature, field, spike, spike_sign };

class World {
 public:
  explicit World(Scenario s);  // s must pass scenario_error()
  World(const World&) = delete;
  World& operator=(const World&) = delete;

  const Scenario& scenario() const { return scenario_; }
  const Schedule& schedule() const { return schedule_; }
  Magnet& magnet() { return magnet_; }
  const Magnet& magnet() const { return magnet_; }

  // The programme's temperature plus any temperature-excursion fault.
  double bath_temperature_k(double t_s) const;
  double electron_temperature_k(double t_s) const;
  bool heating_at(double t_s) const;
  bool open_contact_at(double t_s) const;  // an open-contact fault's window holds t
  // The field at the sample: the magnet's own field plus any remanent field.
  double remanent_field_t(double t_s) const;
  double true_field_t(double t_s) const;
  double sheet_conductance_s(double t_s) const;   // at the true field
  double sigma0_s(double t_s) const;              // at B = 0
  double gain_factor(double t_s) const;           // 1 unless a gain-drift fault
  double true_x_v(double t_s) const;              // the gain's drift included
  // An outlier added to X at t by a spikes fault (0 in most noise intervals).
  double spike_v(double t_s) const;

  // Standard normal for a channel in the noise interval holding t_s.
  double standard_normal(NoiseChannel c, double t_s) const;
  // Uniform in [0, 1) for a channel in the noise interval holding t_s.
  double uniform(NoiseChannel c, double t_s) const;

  // The input range in effect at t: a lockin-range fault's inside its
  // window, otherwise the instrument's own setting.
  double lockin_range_v(double t_s, double set_range_v) const;
  double quadrature_fraction(double t_s) const;   // a quadrature-pickup fault's, else the scenario's
  // The time constant in effect at t: a lockin-time-constant fault's inside
  // its window, otherwise the instrument's own setting.
  double lockin_time_constant_s(double t_s, double set_time_constant_s) const;
  // Whether a lockin-hole fault takes the lock-in's reading away at t.
  bool lockin_in_hole(double t_s) const;
  // time_constant_s and range_v: the instrument's settings (the faults'
  // lockin_time_constant_s and lockin_range_v are applied here).
  LockinReading lockin(double t_s, double time_constant_s, double range_v) const;
  ThermometerReading thermometer(double t_s) const;
  // The magnet's own field field_lag_s ago (a field-reading-lag fault), plus
  // the reading's noise at t; a remanent field is not in the reading.
  double field_reading_t(double t_s) const;

  Truth truth(double from_s, double to_s) const;

 private:
  Scenario scenario_;
  Schedule schedule_;
  Magnet magnet_;
};

}  // namespace lphi::sim
