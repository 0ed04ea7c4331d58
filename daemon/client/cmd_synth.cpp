// lphi synth: synthetic tables on stdout, from lphi's own forward models, so
// that a user (and the demo) can try lphi without data.
//
//   lphi synth sweep      field_t,rsq_ohm[,lockin_x_v]   (synthetic.hpp)
//   lphi synth dephasing  temperature_k,lphi_m,lphi_err_m
//
// Numbers are written in the shortest form that reads back to the same double.

#include <charconv>
#include <cmath>
#include <iostream>
#include <memory>
#include <vector>

#include "analysis/magnetoconductance.hpp"
#include "analysis/synthetic.hpp"
#include "daemon/client/commands.hpp"
#include "daemon/client/exit_codes.hpp"
#include "daemon/client/format.hpp"
#include "daemon/client/options.hpp"

namespace lphi::client {
namespace {

constexpr long long max_rows = 10'000'000;  // bounded output: ~0.5 GB of text

std::string round_trip(double value) {
  char buffer[32];
  const auto [ptr, ec] = std::to_chars(buffer, buffer + sizeof buffer, value);
  return ec == std::errc{} ? std::string(buffer, ptr) : std::string("nan");
}

}  // namespace

int run_synth_sweep(const SynthSweepRequest& rq, std::ostream& out, std::ostream& err) {
  auto fail = [&err](const std::string& message) {
    err << "lphi synth sweep: " << message << '\n';
    return exit_bad_input;
  };
  const auto model = model_from_cli_name(rq.model);
  if (!model) {
    return fail("unknown model '" + rq.model + "' (choose " + cli_model_list + ")");
  }
  if (!rq.lphi_m) return fail("--lphi-m is required");
  for (const std::string& problem :
       {check_positive("--lphi-m", rq.lphi_m), check_finite("--alpha", rq.alpha),
        check_positive("--lso-m", rq.lso_m), check_positive("--width-m", rq.width_m),
        check_positive("--thickness-m", rq.thickness_m), check_positive("--rsq-ohm", rq.rsq_ohm),
        check_positive("--max-field-t", rq.max_field_t), check_positive("--squares", rq.squares),
        check_positive("--current", rq.current_a), check_positive("--gain", rq.gain)}) {
    if (!problem.empty()) return fail(problem);
  }
  if (!std::isfinite(rq.noise_rsq_ohm) || rq.noise_rsq_ohm < 0.0) {
    return fail("--noise-rsq-ohm must be a non-negative number, got " +
                format_number(rq.noise_rsq_ohm, 6));
  }
  if (rq.points < 2 || rq.points > max_rows) {
    return fail("--points must be between 2 and " + std::to_string(max_rows) + ", got " +
                std::to_string(rq.points));
  }
  if (*model == mc::Model::wire1d && !rq.width_m) return fail("--model wire1d needs --width-m");
  if (*model == mc::Model::kawabata3d && !rq.thickness_m) {
    return fail("--model kawabata3d needs --thickness-m");
  }
  if (*model == mc::Model::hln2d_so && !rq.lso_m) return fail("--model hln2d-so needs --lso-m");
  if (rq.squares.has_value() != rq.current_a.has_value()) {
    return fail("--squares and --current go together (they add the lockin_x_v column)");
  }
  if (rq.gain && !rq.current_a) return fail("--gain needs --squares and --current");

  synthetic::SweepTruth truth;
  truth.model = *model;
  truth.lphi_m = *rq.lphi_m;
  truth.alpha = rq.alpha;
  truth.lso_m = rq.lso_m.value_or(0.0);
  truth.width_m = rq.width_m.value_or(0.0);
  truth.thickness_m = rq.thickness_m.value_or(0.0);
  truth.rsq0_ohm = rq.rsq_ohm;
  synthetic::SweepPlan plan;
  plan.max_field_t = rq.max_field_t;
  plan.n_points = static_cast<std::size_t>(rq.points);
  plan.noise_rsq_ohm = rq.noise_rsq_ohm;
  plan.seed = rq.seed;

  const auto sweep = synthetic::make_sweep(truth, plan);
  const bool lockin = rq.current_a.has_value();
  // V_x = R_sq * N * I * gain: the four-terminal relation of conductance.hpp, inverted.
  const double volts_per_ohm = lockin ? *rq.squares * *rq.current_a * rq.gain.value_or(1.0) : 0.0;

  std::string text = lockin ? "field_t,rsq_ohm,lockin_x_v\n" : "field_t,rsq_ohm\n";
  for (const auto& p : sweep) {
    text += round_trip(p.field_t);
    text += ',';
    text += round_trip(p.rsq_ohm);
    if (lockin) {
      text += ',';
      text += round_trip(p.rsq_ohm * volts_per_ohm);
    }
    text += '\n';
  }
  out << text;
  return exit_ok;
}

int run_synth_dephasing(const SynthDephasingRequest& rq, std::ostream& out, std::ostream& err) {
  auto fail = [&err](const std::string& message) {
    err << "lphi synth dephasing: " << message << '\n';
    return exit_bad_input;
  };
  if (!rq.lphi_1k_m) return fail("--lphi-1k-m is required");
  for (const std::string& problem :
       {check_positive("--lphi-1k-m", rq.lphi_1k_m), check_positive("--p", rq.p),
        check_positive("--t-sat-k", rq.t_sat_k), check_positive("--t-min-k", rq.t_min_k),
        check_positive("--t-max-k", rq.t_max_k)}) {
    if (!problem.empty()) return fail(problem);
  }
  if (!(rq.t_max_k > rq.t_min_k)) {
    return fail("--t-max-k (" + format_number(rq.t_max_k, 6) + " K) must exceed --t-min-k (" +
                format_number(rq.t_min_k, 6) + " K)");
  }
  if (rq.points < 2 || rq.points > max_rows) {
    return fail("--points must be between 2 and " + std::to_string(max_rows) + ", got " +
                std::to_string(rq.points));
  }
  // Above ~0.25 a Gaussian factor 1 + E n would too often make L_phi negative.
  if (!std::isfinite(rq.rel_noise) || rq.rel_noise < 0.0 || rq.rel_noise > 0.25) {
    return fail("--rel-noise must be between 0 and 0.25, got " + format_number(rq.rel_noise, 6));
  }

  // L_phi^-2 = L_sat^-2 + b T^p with b = L1^-2 and L_sat^-2 = b T_sat^p.
  const double b = 1.0 / (*rq.lphi_1k_m * *rq.lphi_1k_m);
  const double inverse_lsat2 = rq.t_sat_k ? b * std::pow(*rq.t_sat_k, rq.p) : 0.0;
  synthetic::NormalSource normal(rq.seed);

  std::string text = "temperature_k,lphi_m,lphi_err_m\n";
  const auto n = static_cast<std::size_t>(rq.points);
  const double ratio = rq.t_max_k / rq.t_min_k;
  for (std::size_t i = 0; i < n; ++i) {
    const double fraction = static_cast<double>(i) / static_cast<double>(n - 1);
    const double temperature_k = rq.t_min_k * std::pow(ratio, fraction);
    const double lphi_m = 1.0 / std::sqrt(inverse_lsat2 + b * std::pow(temperature_k, rq.p));
    // Redraw the rare factor that is not positive (needs n < -4 at E = 0.25).
    double factor = 0.0;
    do {
      factor = 1.0 + rq.rel_noise * normal.next();
    } while (!(factor > 0.0));
    const double measured_m = lphi_m * factor;
    text += round_trip(temperature_k);
    text += ',';
    text += round_trip(measured_m);
    text += ',';
    text += round_trip(rq.rel_noise * measured_m);
    text += '\n';
  }
  out << text;
  return exit_ok;
}

void register_synth_commands(CLI::App& app, int* exit_code) {
  CLI::App* synth = app.add_subcommand(
      "synth", "Write a synthetic sweep or L_phi(T) table to standard output");
  synth->require_subcommand(1);

  auto sw = std::make_shared<SynthSweepRequest>();
  CLI::App* sweep = synth->add_subcommand(
      "sweep", "A field sweep from -B to +B: field_t,rsq_ohm (and lockin_x_v with --squares "
               "and --current)");
  sweep->add_option("--model", sw->model, cli_model_list)
      ->capture_default_str();
  add_optional(sweep, "--lphi-m", sw->lphi_m, "the true L_phi in m (required)")->required();
  sweep->add_option("--alpha", sw->alpha, "alpha (hln2d)")->capture_default_str();
  add_optional(sweep, "--lso-m", sw->lso_m, "spin-orbit length in m (hln2d-so; wire1d)");
  add_optional(sweep, "--width-m", sw->width_m, "wire width in m (wire1d)");
  add_optional(sweep, "--thickness-m", sw->thickness_m, "film thickness in m (kawabata3d)");
  sweep->add_option("--rsq-ohm", sw->rsq_ohm, "sheet resistance at zero field, ohm")
      ->capture_default_str();
  sweep->add_option("--max-field-t", sw->max_field_t, "largest |B| in T")->capture_default_str();
  sweep->add_option("--points", sw->points, "number of points, evenly spaced")
      ->capture_default_str();
  sweep->add_option("--noise-rsq-ohm", sw->noise_rsq_ohm, "rms Gaussian noise on R_sq, ohm")
      ->capture_default_str();
  sweep->add_option("--seed", sw->seed, "seed of the noise")->capture_default_str();
  add_optional(sweep, "--squares", sw->squares, "L/W between the probes (for lockin_x_v)");
  add_optional(sweep, "--current", sw->current_a, "rms current in A (for lockin_x_v)");
  add_optional(sweep, "--gain", sw->gain, "preamplifier gain (for lockin_x_v; default 1)");
  sweep->callback([sw, exit_code] { *exit_code = run_synth_sweep(*sw, std::cout, std::cerr); });

  auto dp = std::make_shared<SynthDephasingRequest>();
  CLI::App* deph = synth->add_subcommand(
      "dephasing",
      "An L_phi(T) table from L_phi^-2 = L_sat^-2 + b T^p: temperature_k,lphi_m,lphi_err_m");
  add_optional(deph, "--lphi-1k-m", dp->lphi_1k_m,
               "L_phi at 1 K without saturation, in m (required; b = L^-2)")
      ->required();
  deph->add_option("--p", dp->p, "exponent p")->capture_default_str();
  add_optional(deph, "--t-sat-k", dp->t_sat_k,
               "saturation temperature in K, where both terms are equal (default: none)");
  deph->add_option("--t-min-k", dp->t_min_k, "lowest temperature, K")->capture_default_str();
  deph->add_option("--t-max-k", dp->t_max_k, "highest temperature, K")->capture_default_str();
  deph->add_option("--points", dp->points, "number of temperatures, log-spaced")
      ->capture_default_str();
  deph->add_option("--rel-noise", dp->rel_noise, "relative Gaussian noise on L_phi")
      ->capture_default_str();
  deph->add_option("--seed", dp->seed, "seed of the noise")->capture_default_str();
  deph->callback([dp, exit_code] { *exit_code = run_synth_dephasing(*dp, std::cout, std::cerr); });
}

}  // namespace lphi::client
