// The offline sub-commands of lphi: they read a table, run the analysis
// library on it and print the result, without a daemon.
//
//   lphi fit SWEEP.csv        fit one magnetoconductance sweep (sweep_fit.hpp)
//   lphi dephasing TABLE.csv  fit L_phi(T) and give the saturation verdict
//   lphi synth sweep|dephasing  write synthetic tables to stdout
//
// Each command is a request struct (what the command line asked for) and a
// run function that writes its result to `out`, a one-line error to `err`,
// and returns an exit code from exit_codes.hpp. The run functions do not
// touch process state, so tests can call them directly as well as through
// the built program.
#pragma once

#include <cstdint>
#include <optional>
#include <ostream>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>

namespace lphi::client {

struct FitRequest {
  std::string input_path;            // "-" for stdin
  std::string model = "hln2d";
  std::string input_column;          // empty: rsq_ohm, else r_ohm, else lockin_x_v
  std::vector<std::string> columns;  // --column mappings (column_map.hpp)
  std::optional<double> squares;     // L/W between the voltage probes
  std::optional<double> current_a;   // rms excitation current
  std::optional<double> gain;        // voltage preamplifier gain (default 1)
  std::optional<double> width_m;
  std::optional<double> thickness_m;
  std::optional<double> mean_free_path_m;
  std::optional<double> alpha_fixed;
  std::optional<double> window_t;
  bool background = false;
  bool no_offset = false;
  bool spin_orbit = false;
  bool json = false;
};
int run_fit(const FitRequest& request, std::ostream& out, std::ostream& err);

struct DephasingRequest {
  std::string input_path;  // "-" for stdin
  std::vector<std::string> columns;  // --column mappings (column_map.hpp)
  int dimension = 2;
  std::optional<double> diffusion_m2s;
  std::optional<double> rsq_ohm;
  std::optional<double> resistance_per_length_ohm_m;
  bool json = false;
};
int run_dephasing(const DephasingRequest& request, std::ostream& out, std::ostream& err);

struct SynthSweepRequest {
  std::string model = "hln2d";
  std::optional<double> lphi_m;  // required
  double alpha = 1.0;
  std::optional<double> lso_m;
  std::optional<double> width_m;
  std::optional<double> thickness_m;
  double rsq_ohm = 1000.0;
  double max_field_t = 0.05;
  long long points = 401;
  double noise_rsq_ohm = 0.0;
  std::uint64_t seed = 1;
  std::optional<double> squares;
  std::optional<double> current_a;
  std::optional<double> gain;
};
int run_synth_sweep(const SynthSweepRequest& request, std::ostream& out, std::ostream& err);

struct SynthDephasingRequest {
  std::optional<double> lphi_1k_m;  // required: L_phi at 1 K without saturation
  double p = 1.0;
  std::optional<double> t_sat_k;    // absent: pure power law
  double t_min_k = 0.02;
  double t_max_k = 1.0;
  long long points = 12;
  double rel_noise = 0.03;
  std::uint64_t seed = 1;
};
int run_synth_dephasing(const SynthDephasingRequest& request, std::ostream& out,
                        std::ostream& err);

// Adds the sub-commands to app. Each callback stores its exit code in *exit_code.
void register_fit_command(CLI::App& app, int* exit_code);
void register_dephasing_command(CLI::App& app, int* exit_code);
void register_synth_commands(CLI::App& app, int* exit_code);

}  // namespace lphi::client
