// A simulated cooldown as plain data: the invented sample, its dephasing law,
// the instruments' settings and noise, the programme of temperature plateaus
// and field sweeps, the faults and the ports. Read from TOML by
// scenario_file.hpp; everything here is in SI units and simulated seconds
// (t = 0 when lphi-sim starts).
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "drivers/sim/sample_model.hpp"

namespace lphi::sim {

struct LockinSettings {
  double current_a = 10e-9;             // excitation, rms
  double gain = 100.0;                  // preamplifier voltage gain
  double quadrature_fraction = 0.01;    // Y = q X
  double frequency_hz = 13.7;
  double range_v = 0.01;                // input range; overload at |X| or |Y| >= range
  double time_constant_s = 0.3;         // first-order output filter
};

struct ThermometerSettings {
  // Invented sensor calibration R(T) = r0 exp(sqrt(t0/T)) (the hopping-like
  // form of ruthenium-oxide sensors, common practice).
  double r0_ohm = 1000.0;
  double t0_k = 4.0;
};

struct MagnetSettings {
  double limit_t = 1.0;                 // |target| allowed on the set commands
  double max_rate_t_per_s = 0.01;
};

struct NoiseLevels {
  double sample_interval_s = 0.1;       // noise is drawn once per interval of simulated time
  double lockin_x_v = 0.0;              // rms, on X
  double lockin_y_v = 0.0;              // rms, on Y
  double temperature_rel = 0.0;         // relative rms on the thermometer reading
  double field_t = 0.0;                 // rms on the magnet's field reading
};

// How a plateau's magnet sweeps: `both` alternately -B_max -> +B_max and
// back; `up` only -B_max -> +B_max, the magnet returning to -B_max at
// kFastReturnFactor times the rate between sweeps (a one-way magnet);
// `unipolar` legs alternately 0 -> +B_max and +B_max -> 0 (a one-sided
// magnet), each leg one sweep.
enum class SweepMode { both, up, unipolar };
inline constexpr double kFastReturnFactor = 20.0;
const char* sweep_mode_name(SweepMode m);  // "both", "up", "unipolar"

struct Plateau {
  double temperature_k = 1.0;
  double ramp_s = 600.0;        // linear change from the previous temperature
  double dwell_s = 600.0;       // at B = 0 after the ramp, before the sweeps
  int sweeps = 2;               // alternately -B_max -> +B_max and back
  double max_field_t = 0.05;
  double rate_t_per_s = 1e-4;
  SweepMode sweep_mode = SweepMode::both;
};

struct Programme {
  double start_temperature_k = 1.0;
  std::vector<Plateau> plateaus;
};

enum class Instrument { lockin, thermometer, magnet };
inline constexpr Instrument kInstruments[] = {Instrument::lockin, Instrument::thermometer,
                                               Instrument::magnet};
const char* instrument_name(Instrument i);  // "lockin", "thermometer", "magnet"

struct Faults {
  struct Window {
    double start_s = 0.0;
    double duration_s = 0.0;
    bool contains(double t) const { return t >= start_s && t < start_s + duration_s; }
    // duration_s 0 means "to the end" (the faults that say so).
    bool contains_open(double t) const {
      return t >= start_s && (duration_s <= 0.0 || t < start_s + duration_s);
    }
  };
  // Lock-in dropout: "close" closes every connection and every new one at
  // once; "silent" keeps connections open but answers nothing.
  struct Dropout : Window {
    bool silent = false;
  };
  struct Reset {
    bool all = true;                    // every instrument, or just `instrument`
    Instrument instrument = Instrument::lockin;
    double at_s = 0.0;                  // first reset
    double period_s = 0.0;              // 0: once
  };
  // The lock-in's input range is turned to range_v (overload when |X| or
  // |Y| reaches it).
  struct Range : Window {
    double range_v = 0.0;
  };
  // Capacitive pickup: Y = fraction * X instead of the scenario's fraction.
  struct Pickup : Window {
    double fraction = 0.0;
  };
  // A heater glitch: the bath (and the electrons with it) warms by
  // amplitude_k sin^2(pi (t - start_s) / duration_s) during the window.
  struct Excursion : Window {
    double amplitude_k = 0.0;
  };
  std::vector<Dropout> dropouts;
  std::vector<Window> stuck;            // thermometer repeats its reading from start_s
  std::vector<Range> ranges;
  std::vector<Pickup> pickups;
  std::vector<Excursion> excursions;
  // An open contact (a lifted bond or a broken current lead): no current
  // flows through the sample, so the lock-in reads only its noise floor.
  std::vector<Window> open_contacts;
  std::vector<Reset> resets;
  // The field at the sample is the magnet's reading plus field_t from
  // start_s on (a superconducting magnet's trapped flux after a high-field
  // excursion).
  struct Remanence {
    double field_t = 0.0;
    double start_s = 0.0;
  };
  std::vector<Remanence> remanences;    // summed when several are in effect
  // The magnet reports the field it had delay_s earlier.
  double field_lag_s = 0.0;
  // The lock-in's time constant is raised to time_constant_s in the window
  // (duration_s 0: to the end); SENS:TCON? reports it.
  struct TimeConstant : Window {
    double time_constant_s = 0.0;
  };
  std::vector<TimeConstant> time_constants;
  // No lock-in reading while the magnet's field is in [from_t, to_t] inside
  // the window (duration_s 0: to the end).
  struct Hole : Window {
    double from_t = 0.0, to_t = 0.0;
  };
  std::vector<Hole> holes;
  // The bath drifts linearly from T_p to T_p (1 + relative) across each
  // plateau's sweeps, holds that to the plateau's end, and joins the next
  // plateau's ramp.
  double plateau_drift_relative = 0.0;
  // The lock-in's gain (X and Y with it) is multiplied by
  // 1 + per_hour (t - start_s) / 3600 s from start_s on.
  double gain_drift_per_hour = 0.0;
  double gain_drift_start_s = 0.0;
  // Isolated outliers on X: each noise interval carries one with
  // probability `probability`, of size size_sigma * noise.lockin_x_v and
  // random sign.
  double spike_probability = 0.0;
  double spike_size_sigma = 0.0;
  bool heating = false;                 // electron heating from heating_start_s on
  double heating_start_s = 0.0;
  double heating_duration_s = 0.0;      // 0: until the end (the filtering is never fixed)
  double heating_floor_k = 0.0;
  double heating_exponent = 2.0;
};

struct Scenario {
  std::string name;
  Sample sample;
  DephasingLaw dephasing;
  LockinSettings lockin;
  ThermometerSettings thermometer;
  MagnetSettings magnet;
  NoiseLevels noise;
  Programme programme;
  Faults faults;
  std::uint64_t seed = 1;
  int ports[3] = {0, 0, 0};             // by Instrument; 0 picks a free port
};

// Empty when the scenario is usable, otherwise what is wrong with it.
std::string scenario_error(const Scenario& s);

}  // namespace lphi::sim
