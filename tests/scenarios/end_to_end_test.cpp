// Each lphi-sim scenario recorded, replayed into a real lphid, and the
// daemon's fits and verdict compared with the scenario's truth: the numbers
// lphi-sim put in (drivers/sim/scenarios/*.toml, read back from the truth
// file's scenario record) and the L_phi it computed for every sweep.
//
// Recordings at 1 Hz: ~51 000 rows a scenario, 1000 points a sweep, each
// test a few seconds. The scenarios' sweeps, rates and time constants are
// chosen so that the sweep fits are limited by noise, not by the lock-in's
// lag or the point spacing (drivers/sim/COMMANDS.md, "Scenarios for the
// end-to-end tests").
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "tests/scenarios/live_run.hpp"

namespace {

using lphi::testing::LiveRun;
using nlohmann::json;

constexpr double kRateHz = 1.0;

double num(const json& j, const char* key) {
  if (!j.contains(key) || !j[key].is_number()) {
    ADD_FAILURE() << "no number '" << key << "' in " << j.dump();
    return std::nan("");
  }
  return j[key].get<double>();
}

// Records `scenario`, configures `sample` with `model` (empty: the
// scenario's) and replays it; the fits, in time order.
std::vector<json> run_scenario(LiveRun& run, const std::string& scenario, const std::string& sample,
                               const std::string& model, const std::string& extra = "") {
  EXPECT_TRUE(run.record(scenario, kRateHz)) << run.error();
  run.write_config(sample, model, extra);
  EXPECT_TRUE(run.start_daemon()) << run.error();
  const auto r = run.replay(run.csv_path(), sample);
  EXPECT_EQ(r.exit_code, 0) << r.out << r.err << run.daemon_log();
  const auto fits = run.query("fits", sample);
  EXPECT_TRUE(fits && fits->is_array()) << run.error();
  std::vector<json> out;
  if (fits && fits->is_array()) out.assign(fits->begin(), fits->end());
  std::sort(out.begin(), out.end(),
            [](const json& a, const json& b) { return a.value("t_start", 0.0) < b.value("t_start", 0.0); });
  return out;
}

// Every sweep lphi-sim ran is found and fitted, and each fit's L_phi and
// temperature agree with the truth of its sweep (matched in time order).
// Tolerances: 1 % on the temperature (the mean of ~1000 readings with 0.2 %
// noise is good to 0.01 %; 1 % allows a sweep trimmed at its ends), and
// 3 % on L_phi: the offline fits of the same sweeps (`lphi fit`) land within
// 1.2 % of the truth at every plateau; the margin covers the daemon's own
// window choice.
void expect_fits_follow_truth(const std::vector<json>& fits, const std::vector<json>& sweeps,
                              double lphi_tolerance = 0.03) {
  ASSERT_EQ(fits.size(), sweeps.size()) << "one fit per simulated sweep";
  for (std::size_t i = 0; i < fits.size(); ++i) {
    SCOPED_TRACE("sweep " + std::to_string(i) + " at " + std::to_string(double(sweeps[i]["temperature_k"])) + " K");
    EXPECT_TRUE(fits[i].value("ok", false)) << fits[i].dump();
    EXPECT_NEAR(num(fits[i], "temperature_k") / double(sweeps[i]["temperature_k"]), 1.0, 0.01);
    EXPECT_NEAR(num(fits[i], "lphi_m") / double(sweeps[i]["lphi_m"]), 1.0, lphi_tolerance);
  }
}

TEST(Scenario, NoSaturationIsAPowerLawWithPNearOne) {
  // no_saturation.toml: 1/tau_phi = A T with p = 1 exactly. The verdict must
  // be power-law with |p - 1| within 3 of its reported errors and 0.2.
  LiveRun run;
  const auto fits = run_scenario(run, "no_saturation.toml", "film", "");
  expect_fits_follow_truth(fits, run.truth("sweep"));
  const auto v = run.verdict("film");
  ASSERT_TRUE(v) << run.error();
  EXPECT_EQ(v->value("state", ""), "power-law") << v->dump(2);
  const double p_true = run.scenario_record()["dephasing"]["p"];
  const double p = num(*v, "exponent_p"), p_err = num(*v, "exponent_p_err");
  EXPECT_LE(std::abs(p - p_true), 3 * p_err) << "p = " << p << " +- " << p_err;
  EXPECT_LE(std::abs(p - p_true), 0.2);
}

TEST(Scenario, IntrinsicSaturationIsSaturatedAtTheTrueTsatAndLsat) {
  // saturation.toml: 1/tau_phi = gamma0 + A T. In the model of
  // analysis/dephasing.hpp, L_sat = sqrt(D / gamma0) and T_sat, where the
  // two terms are equal, is (gamma0 / A)^(1/p): 1 um and 50 mK here. Both
  // within 3 of their reported errors and within 10 % (L_sat) and 30 %
  // (T_sat) of the truth; electrons cool (sigma(0) follows ln T), so the
  // cause is intrinsic.
  LiveRun run;
  const auto fits = run_scenario(run, "saturation.toml", "film", "");
  expect_fits_follow_truth(fits, run.truth("sweep"));
  const auto v = run.verdict("film");
  ASSERT_TRUE(v) << run.error();
  EXPECT_EQ(v->value("state", ""), "saturated") << v->dump(2);
  const auto& d = run.scenario_record()["dephasing"];
  const double l_sat = std::sqrt(double(run.scenario_record()["sample"]["diffusion_m2s"]) / double(d["gamma0_per_s"]));
  const double t_sat = std::pow(double(d["gamma0_per_s"]) / double(d["a_per_s"]), 1.0 / double(d["p"]));
  const double l = num(*v, "lphi_sat_m"), l_err = num(*v, "lphi_sat_err_m");
  const double t = num(*v, "t_sat_k"), t_err = num(*v, "t_sat_err_k");
  EXPECT_LE(std::abs(l - l_sat), 3 * l_err) << "L_sat = " << l << " +- " << l_err << ", truth " << l_sat;
  EXPECT_LE(std::abs(l - l_sat), 0.1 * l_sat);
  EXPECT_LE(std::abs(t - t_sat), 3 * t_err) << "T_sat = " << t << " +- " << t_err << ", truth " << t_sat;
  EXPECT_LE(std::abs(t - t_sat), 0.3 * t_sat);
  EXPECT_EQ(v->value("electrons_cooling", json()), json(true)) << v->dump(2);
  EXPECT_EQ(v->value("likely_cause", json()), json("intrinsic")) << v->dump(2);
}

TEST(Scenario, ElectronHeatingIsNotMistakenForIntrinsicSaturation) {
  // heating.toml: no saturation term, but the electrons stop cooling at
  // 60 mK (T_e^2 = T^2 + T_floor^2) while the thermometer shows the bath.
  // L_phi flattens; so does sigma(0), which the daemon must notice.
  LiveRun run;
  const auto fits = run_scenario(run, "heating.toml", "film", "");
  expect_fits_follow_truth(fits, run.truth("sweep"));
  const auto v = run.verdict("film");
  ASSERT_TRUE(v) << run.error();
  const std::string state = v->value("state", "");
  EXPECT_TRUE(state == "saturating" || state == "saturated") << v->dump(2);
  EXPECT_EQ(v->value("electrons_cooling", json()), json(false)) << v->dump(2);
  EXPECT_EQ(v->value("likely_cause", json()), json("electron-heating-or-noise")) << v->dump(2);
}

TEST(Scenario, WireFittedWithTheWireModelGivesPNearTwoThirds) {
  // wire.toml: a 50 nm wide wire with 1D Nyquist dephasing, p = 2/3
  // (Altshuler-Aronov-Khmelnitsky, as quoted in analysis/dephasing.hpp).
  // Fitted with wire1d; the probe length is squares * width = 100 um.
  LiveRun run;
  const auto fits = run_scenario(run, "wire.toml", "wire", "wire1d", "probe_length_m = 100e-6\n");
  expect_fits_follow_truth(fits, run.truth("sweep"));
  const auto v = run.verdict("wire");
  ASSERT_TRUE(v) << run.error();
  EXPECT_EQ(v->value("state", ""), "power-law") << v->dump(2);
  const double p = num(*v, "exponent_p"), p_err = num(*v, "exponent_p_err");
  EXPECT_LE(std::abs(p - 2.0 / 3.0), 3 * p_err) << "p = " << p << " +- " << p_err;
  EXPECT_LE(std::abs(p - 2.0 / 3.0), 0.2);
}

TEST(Scenario, AntilocalizationFittedWithHlnGivesAlphaNearMinusOneHalf) {
  // antilocalization.toml: strong spin-orbit scattering (L_so = 80 nm). With
  // L_phi >> L_so the HLN form with a free prefactor describes the low-field
  // antilocalization with alpha = -1/2 (Hikami, Larkin, Nagaoka, Prog.
  // Theor. Phys. 63, 707 (1980); the symplectic limit). At 1 K L_phi is only
  // 4.6 L_so and the offline fits give alpha = -0.45; from 0.12 K down
  // (L_phi > 13 L_so) they give -0.50 +- 0.003. Checked there within 0.05.
  LiveRun run;
  const auto fits = run_scenario(run, "antilocalization.toml", "film-so", "hln2d");
  ASSERT_EQ(fits.size(), run.truth("sweep").size());
  int checked = 0;
  for (const auto& f : fits) {
    if (num(f, "temperature_k") > 0.13) continue;
    ASSERT_TRUE(f.contains("alpha") && f["alpha"].is_number()) << f.dump();
    EXPECT_NEAR(f["alpha"].get<double>(), -0.5, 0.05) << f.dump();
    ++checked;
  }
  EXPECT_EQ(checked, 8) << "four plateaus from 0.12 K down, two sweeps each";
}

}  // namespace
