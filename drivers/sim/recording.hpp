// Recording a scenario instead of serving it: the same World (model,
// programme, noise and faults) read at a fixed lock-in rate in simulated
// time, as a poller of the served instruments would read it, but without any
// socket and as fast as the model can be evaluated.
//
// Row k is at t_k = k / rate_hz simulated seconds, k = 0 .. floor(end * rate),
// end being the programme's end (or a given duration). Each row holds
//   - the magnet's field reading (every row);
//   - the lock-in's reading X, Y, overload with the instrument's settings
//     (range, time constant), except inside a lockin-dropout window (either
//     mode: a poller gets no reply then) or a lockin-hole fault's field
//     range, where the lock-in part is empty; and the time constant in
//     effect (a lockin-time-constant fault's inside its window);
//   - the thermometer's reading on every thermometer_every-th row (k a
//     multiple of it), stuck windows included (World::thermometer).
// Connection resets have no counterpart: a recording has no connections.
// Every value is World's own function of t, so a row equals what the served
// instrument answers at the same simulated time (tests/scenarios).
//
// Pure: no I/O. A Recorder borrows the World, which must outlive it.
#pragma once

#include <cstddef>
#include <cstdint>
#include <string>

#include "drivers/sim/world.hpp"

namespace lphi::sim {

struct RecordingOptions {
  double rate_hz = 10.0;          // lock-in readings per simulated second
  std::int64_t thermometer_every = 1;  // a thermometer reading on every N-th row
  double duration_s = 0.0;        // simulated; 0: the programme's end
};

inline constexpr double kMaxRecordingRateHz = 1000.0;

// Empty when usable, otherwise what is wrong (naming the option).
std::string recording_error(const RecordingOptions& o);

struct RecordedRow {
  std::int64_t index = 0;
  double t_s = 0.0;
  bool has_temperature = false;
  double temperature_k = 0.0;
  double field_t = 0.0;
  bool has_lockin = false;
  LockinReading lockin;
  double time_constant_s = 0.0;   // when has_lockin
};

// Whether the lock-in answers at t: false inside a lockin-dropout window.
bool lockin_answers(const Scenario& s, double t_s);

class Recorder {
 public:
  // range_v and time_constant_s: the lock-in's settings, as the served
  // instrument has them after *RST (SimInstrument::range_v() etc.).
  Recorder(const World& world, const RecordingOptions& options, double range_v,
           double time_constant_s);

  std::int64_t rows() const { return rows_; }  // number of rows in the recording
  double end_s() const { return end_s_; }
  RecordedRow row(std::int64_t k) const;       // 0 <= k < rows()

  // What the instruments read at an arbitrary simulated time t.
  RecordedRow at(double t_s, bool with_temperature) const;

 private:
  const World* world_;
  RecordingOptions options_;
  double range_v_, time_constant_s_;
  double end_s_ = 0.0;
  std::int64_t rows_ = 0;
};

}  // namespace lphi::sim
