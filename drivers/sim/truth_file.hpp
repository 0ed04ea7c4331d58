// The truth file: what lphi-sim knows exactly about a run, one JSON object
// per line ("JSON lines"), written as the run goes.
//   {"record":"scenario", ...}  first line: the scenario's parameters
//   {"record":"plateau", ...}   when a plateau (ramp, dwell, sweeps, return) ends
//   {"record":"sweep", ...}     when a sweep ends
// Plateau and sweep records give, at the midpoint of the stretch (the
// plateau from reaching its temperature to the field's return to 0; the
// sweep from start to end): the bath temperature_k, electron_temperature_k,
// lphi_m, sigma0_s (sheet conductance at B = 0), whether electron heating was
// on, whether the magnet was taken over by a set command (manual_field; the
// sweep then did not follow the programme), and start_s / end_s in simulated
// time; and the measurement faults in effect: field_offset_t (remanent
// field), field_lag_s, lockin_time_constant_s, gain_factor, the bath's
// temperature_start_k / temperature_end_k (a plateau drift), and lockin_hole
// with hole_from_t / hole_to_t. The bath drifts linearly under a
// plateau-drift fault, so the midpoint temperature is the sweep's mean and
// lphi_m is L_phi at that mean. The scenario record lists the faults with
// their parameters under "faults"; plateau records give the sweep_mode. Numbers are written with 17 significant digits, so they read back
// exactly.
#pragma once

#include <string>

#include "drivers/sim/schedule.hpp"
#include "drivers/sim/world.hpp"

namespace lphi::sim::truth {

std::string scenario_record(const Scenario& s);
std::string plateau_record(const World& w, const PlannedPlateau& p);
std::string sweep_record(const World& w, const PlannedSweep& s);

}  // namespace lphi::sim::truth
