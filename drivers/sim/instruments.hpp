// The three simulated instruments' command trees (documented in
// drivers/sim/COMMANDS.md and by `lphi-sim --list-commands`). Each
// SimInstrument answers one command line at a given simulated time from the
// shared World; it keeps its own settings and SCPI error queue (one queue per
// instrument, shared by its connections, as on a real instrument).
// Not thread-safe: used from lphi-sim's single io_context thread.
#pragma once

#include <optional>
#include <string>
#include <string_view>

#include "drivers/sim/scpi.hpp"
#include "drivers/sim/world.hpp"

namespace lphi::sim {

class SimInstrument {
 public:
  // `clock_origin_s` is added to every time the instrument reports (SYST:TIME?
  // and the t field of MEAS:ALL?): 0 reports simulated seconds since the start,
  // a Unix time makes the instrument's clock read epoch time. The model itself
  // always runs on simulated seconds since the start.
  SimInstrument(Instrument kind, World& world, double speed, double clock_origin_s = 0.0);
  SimInstrument(const SimInstrument&) = delete;
  SimInstrument& operator=(const SimInstrument&) = delete;

  Instrument kind() const { return kind_; }

  // One line without its terminator. Returns the reply line (without a
  // terminator) for a query, or for a failed query "ERR <code>,\"<message>\""
  // (the error is also queued); a set command returns nothing, its errors go
  // to the queue only.
  std::optional<std::string> execute(std::string_view line, double t_s);

  // A line longer than scpi::kMaxLineBytes was discarded: queues -223 and
  // returns the ERR reply.
  std::string line_too_long();

  // Settings (the lock-in's; the magnet's state lives in World).
  double range_v() const { return range_v_; }
  double time_constant_s() const { return time_constant_s_; }

  // The command tree of one instrument, one command per line with its reply.
  static std::string command_list(Instrument kind);

 private:
  std::optional<std::string> run(const scpi::Request& r, double t_s, scpi::Error& error, bool& failed);
  std::optional<std::string> run_lockin(const scpi::Request& r, double t_s, scpi::Error& error, bool& failed);
  std::optional<std::string> run_thermometer(const scpi::Request& r, double t_s, scpi::Error& error, bool& failed);
  std::optional<std::string> run_magnet(const scpi::Request& r, double t_s, scpi::Error& error, bool& failed);
  void reset();
  std::string clock_reading(double t_s) const;

  Instrument kind_;
  World* world_;
  double speed_;
  double clock_origin_s_;
  scpi::ErrorQueue errors_;
  double range_v_ = 0.0;
  double time_constant_s_ = 0.0;
  double frequency_hz_ = 0.0;
};

}  // namespace lphi::sim
