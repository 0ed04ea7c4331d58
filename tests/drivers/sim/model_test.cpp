// lphi-sim's physics model: the truth it reports against the analysis
// library's forward models, the zero-field ln T law, electron heating, the
// lock-in conversion and filter, and determinism.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "analysis/conductance.hpp"
#include "analysis/magnetoconductance.hpp"
#include "analysis/synthetic.hpp"
#include "drivers/sim/sample_model.hpp"
#include "drivers/sim/scenario_file.hpp"
#include "drivers/sim/truth_file.hpp"
#include "drivers/sim/world.hpp"

namespace {

using namespace lphi;

// e^2/(pi h) from the SI 2019 exact values of e and h (BIPM SI brochure, 9th
// edition), written out here rather than taken from analysis/constants.hpp.
constexpr double kE = 1.602176634e-19;
constexpr double kH = 6.62607015e-34;
const double kWl = kE * kE / (std::acos(-1.0) * kH);
const double kHbar = kH / (2.0 * std::acos(-1.0));

std::vector<std::filesystem::path> shipped_scenarios() {
  std::vector<std::filesystem::path> out;
  for (const auto& e :
       std::filesystem::directory_iterator(std::string(LPHI_SOURCE_DIR) + "/drivers/sim/scenarios"))
    if (e.path().extension() == ".toml") out.push_back(e.path());
  std::sort(out.begin(), out.end());
  return out;
}

sim::Scenario load(const std::filesystem::path& p) {
  auto loaded = sim::load_scenario_file(p.string());
  EXPECT_TRUE(loaded.scenario) << loaded.error;
  return loaded.scenario ? *loaded.scenario : sim::Scenario{};
}

// The model's Delta sigma straight from analysis/magnetoconductance.hpp.
double analysis_delta(const nlohmann::json& sample, double field_t, double lphi_m) {
  const auto model = mc::model_from_name(sample["model"].get<std::string>());
  EXPECT_TRUE(model) << sample["model"];
  const double lso = sample["lso_m"];
  switch (model.value_or(mc::Model::hln2d)) {
    case mc::Model::hln2d: return mc::hln2d(field_t, sample["alpha"], lphi_m);
    case mc::Model::hln2d_so: return mc::hln2d_so(field_t, lphi_m, lso);
    case mc::Model::wire1d:
      return lso > 0 ? mc::wire1d_so(field_t, lphi_m, lso, sample["width_m"])
                     : mc::wire1d(field_t, lphi_m, sample["width_m"]);
    case mc::Model::kawabata3d: return mc::kawabata3d(field_t, lphi_m, sample["thickness_m"]);
  }
  return std::nan("");
}

TEST(SimTruth, ShippedScenariosAgreeWithTheAnalysisForwardModels) {
  // Every truth record is recomputed from the scenario record alone with the
  // analysis library's model functions and the formulas of
  // drivers/sim/sample_model.hpp (T_e = (T^k + T_floor^k)^(1/k),
  // L_phi = sqrt(D / (gamma0 + A T_e^p)), sigma0 = 1/R_D + e^2/(pi h)
  // [kappa ln(T_e/T_ref) - Delta(B_tr)]). Tolerance 1e-13 relative: the same
  // double operations in a different order, i.e. rounding only.
  const auto files = shipped_scenarios();
  ASSERT_GE(files.size(), 6u) << "six scenarios are shipped";
  for (const auto& file : files) {
    SCOPED_TRACE(file.filename().string());
    sim::World world(load(file));
    const auto head = nlohmann::json::parse(sim::truth::scenario_record(world.scenario()));
    const auto& s = head["sample"];
    const auto& d = head["dephasing"];
    const auto& h = head["heating"];
    const double b_tr = kHbar / (2.0 * kE * std::pow(double(s["mean_free_path_m"]), 2));
    EXPECT_NEAR(double(s["transport_field_t"]) / b_tr, 1.0, 1e-14);
    const double kappa = 1.0 - 0.75 * double(s["interaction_f"]);
    // A plateau-drift fault moves the bath linearly from T_p to T_p (1 + r)
    // across the plateau's sweeps (drivers/sim/COMMANDS.md, "Faults").
    double drift = 0.0;
    for (const auto& f : head["faults"])
      if (f["kind"] == "plateau-drift") drift = f["relative"];
    auto plateau_temperature = [&](std::size_t plateau, double at_s) {
      const auto& p = world.schedule().plateaus()[plateau];
      const double span = p.sweeps_end_s - p.sweeps_start_s;
      const double frac = span > 0 ? std::clamp((at_s - p.sweeps_start_s) / span, 0.0, 1.0) : 0.0;
      return p.temperature_k * (1.0 + drift * frac);
    };
    const double t_tol = drift != 0.0 ? 4e-15 : 1e-15;  // the drift's few roundings
    std::size_t checked = 0;
    for (const auto& sweep : world.schedule().sweeps()) {
      const auto rec = nlohmann::json::parse(sim::truth::sweep_record(world, sweep));
      const double t = rec["temperature_k"];
      EXPECT_NEAR(t, plateau_temperature(sweep.plateau, 0.5 * (sweep.start_s + sweep.end_s)), t_tol)
          << "the sweeps run at the plateau temperature";
      // The heating lasts duration_s from start_s (0: to the end).
      const double mid = 0.5 * (sweep.start_s + sweep.end_s), dur = h.value("duration_s", 0.0);
      const bool heated = h["on"] && mid >= double(h["start_s"]) &&
                          (dur <= 0.0 || mid < double(h["start_s"]) + dur);
      const double k = h["exponent"];
      const double te = heated ? std::pow(std::pow(t, k) + std::pow(double(h["floor_k"]), k), 1.0 / k) : t;
      EXPECT_NEAR(double(rec["electron_temperature_k"]) / te, 1.0, 1e-13);
      const double rate = double(d["gamma0_per_s"]) + double(d["a_per_s"]) * std::pow(te, double(d["p"]));
      const double lphi = std::sqrt(double(s["diffusion_m2s"]) / rate);
      EXPECT_NEAR(double(rec["lphi_m"]) / lphi, 1.0, 1e-13);
      const double sigma0 = 1.0 / double(s["rsq_ohm"]) +
                            kWl * (kappa * std::log(te / double(s["reference_temperature_k"])) -
                                   analysis_delta(s, b_tr, lphi));
      EXPECT_NEAR(double(rec["sigma0_s"]) / sigma0, 1.0, 1e-13);

      // The field dependence is exactly the analysis model's: compare the
      // simulator's R_sq(B) with analysis::synthetic::make_sweep (another
      // code path of the analysis library) for the truth's L_phi and sigma0.
      synthetic::SweepTruth st;
      st.model = world.scenario().sample.model;
      st.lphi_m = lphi;
      st.alpha = s["alpha"];
      st.lso_m = s["lso_m"];
      st.width_m = s["width_m"];
      st.thickness_m = s["thickness_m"];
      st.rsq0_ohm = 1.0 / double(rec["sigma0_s"]);
      synthetic::SweepPlan plan;
      plan.max_field_t = std::abs(sweep.to_t);
      plan.n_points = 21;
      for (const auto& point : synthetic::make_sweep(st, plan)) {
        const double sim_rsq = 1.0 / sim::sheet_conductance_s(world.scenario().sample,
                                                              world.scenario().dephasing,
                                                              point.field_t, te);
        EXPECT_NEAR(sim_rsq / point.rsq_ohm, 1.0, 1e-12) << "B = " << point.field_t;
      }
      ++checked;
    }
    EXPECT_GT(checked, 0u);
    for (const auto& plateau : world.schedule().plateaus()) {
      const auto rec = nlohmann::json::parse(sim::truth::plateau_record(world, plateau));
      EXPECT_NEAR(double(rec["temperature_k"]),
                  plateau_temperature(plateau.index, 0.5 * (plateau.reached_s + plateau.end_s)), t_tol);
      EXPECT_NEAR(double(rec["sigma0_s"]) / world.sigma0_s(0.5 * (plateau.reached_s + plateau.end_s)), 1.0, 1e-15);
    }
  }
}

sim::Sample film() {
  sim::Sample s;
  s.model = mc::Model::hln2d;
  s.alpha = 1.0;
  s.diffusion_m2s = 1e-3;
  s.mean_free_path_m = 2e-9;
  s.interaction_f = 0.5;
  return s;
}

double zero_field_slope(const sim::Sample& s, const sim::DephasingLaw& d, double t1, double t2) {
  return (sim::sheet_conductance_s(s, d, 0.0, t2) - sim::sheet_conductance_s(s, d, 0.0, t1)) /
         (kWl * std::log(t2 / t1));
}

TEST(SimModel, ZeroFieldConductanceFollowsLnTWithSlopeAlphaPPlusKappa) {
  // analysis/PHYSICS.md, "Zero-field temperature dependence" (Lee and
  // Ramakrishnan, RMP 57, 287 (1985)): d sigma / d ln T = (e^2/(pi h)) (alpha p + 1 - 3F/4).
  // The simulator's exact bracket departs from the pure logarithm by
  // psi(1/2 + x) - psi(1/2) ~ (pi^2/2) x, x = B_phi/B_tr = l^2/(2 L_phi^2)
  // <= 1e-4 here, so the slope agrees to ~1e-4; tolerance 1e-3.
  sim::DephasingLaw d{0.0, 2e10, 1.0};
  const double kappa = 1.0 - 0.75 * 0.5;
  EXPECT_NEAR(zero_field_slope(film(), d, 0.02, 1.0), 1.0 * 1.0 + kappa, 1e-3);
  sim::DephasingLaw d32{0.0, 2e10, 1.5};
  EXPECT_NEAR(zero_field_slope(film(), d32, 0.02, 1.0), 1.5 + kappa, 1e-3);
  sim::Sample antiloc = film();
  antiloc.alpha = -0.5;
  EXPECT_NEAR(zero_field_slope(antiloc, d, 0.02, 1.0), -0.5 + kappa, 1e-3);
  // Strong spin-orbit in the three-term form behaves as alpha = -1/2; the
  // slope then carries an extra B_phi/B_so ~ (L_so/L_phi)^2 <= 4e-4 (L_so =
  // 20 nm, L_phi >= 1 um below 0.1 K) times p: tolerance 2e-3.
  sim::Sample so = film();
  so.model = mc::Model::hln2d_so;
  so.lso_m = 20e-9;
  EXPECT_NEAR(zero_field_slope(so, d, 0.02, 0.1), -0.5 + kappa, 2e-3);
}

TEST(SimModel, ElectronHeatingWorkedExampleAndFlatteningBelowTheFloor) {
  // analysis/PHYSICS.md, "Electron heating": a pad-cooled wire with eV = k_B T has
  // T_e^2 = T^2 + (3/(4 pi^2)) T^2, T_e = 1.037 T (quoted to 4 digits: 5e-4).
  const double pi = std::acos(-1.0);
  const double t = 0.05;
  EXPECT_NEAR(sim::heated_temperature_k(t, std::sqrt(3.0) / (2.0 * pi) * t, 2.0) / t, 1.037, 5e-4);
  EXPECT_DOUBLE_EQ(sim::heated_temperature_k(t, 0.0, 2.0), t);  // no floor: T_e = T
  // Far below the floor T_e ~ T_floor: sigma(0) stops following ln T.
  sim::DephasingLaw d{0.0, 2e10, 1.0};
  const double floor = 0.1;
  auto sigma0 = [&](double bath) {
    return sim::sheet_conductance_s(film(), d, 0.0, sim::heated_temperature_k(bath, floor, 2.0));
  };
  const double cold = (sigma0(0.02) - sigma0(0.01)) / (kWl * std::log(2.0));
  const double warm = (sigma0(2.0) - sigma0(1.0)) / (kWl * std::log(2.0));
  // T_e(0.01) = 0.10050, T_e(0.02) = 0.10198: the slope falls by
  // ln(1.0148)/ln 2 = 0.021 of the unheated one; above the floor it is ~1.625.
  EXPECT_LT(cold, 0.03 * warm);
  EXPECT_NEAR(warm, 1.625, 0.02);  // T_e = 1.005 T at 1 K, nearly unheated
}

TEST(SimModel, LockinXWorkedExample) {
  // By hand: X = I R_sq N g = 10 nA * 1500 ohm * 5 * 100 = 7.5 mV; and the
  // analysis library's conversion (R = V/(g I), R_sq = R/N) inverts it.
  const double x = sim::lockin_x_v(1500.0, 5.0, 10e-9, 100.0);
  EXPECT_NEAR(x, 7.5e-3, 1e-15);
  EXPECT_NEAR(conductance::sheet_resistance_ohm(conductance::resistance_ohm(x, 10e-9, 100.0), 5.0),
              1500.0, 1e-9);
}

sim::Scenario quiet_scenario() {
  sim::Scenario s;
  s.sample = film();
  s.dephasing = {0.0, 2e10, 1.0};
  s.programme.start_temperature_k = 1.0;
  sim::Plateau first{1.0, 0.0, 100.0, 1, 0.05, 1e-3};
  sim::Plateau second{0.5, 0.0, 100.0, 1, 0.05, 1e-3};
  s.programme.plateaus = {first, second};
  s.noise.sample_interval_s = 0.1;
  return s;
}

TEST(SimModel, LockinSettlesWithItsTimeConstantAfterAStep) {
  // The second plateau starts with a temperature step (ramp_s = 0). A
  // first-order filter leaves exp(-s/tau) of the step after s; the filter is
  // a 48-node average, so the remaining fraction is quantised to 1/48.
  sim::World w(quiet_scenario());
  const double t_step = w.schedule().plateaus()[1].ramp_start_s;
  const double tau = 1.0;
  const double before = w.true_x_v(t_step - 1e-6);
  const double after = w.true_x_v(t_step + 1e-6);
  ASSERT_GT(std::abs(after - before), 1e-5) << "the step changes X";
  for (double s : {0.5, 1.0, 2.0, 3.0}) {
    const double read = w.lockin(t_step + s, tau, 1.0).x_v;
    const double remaining = (read - after) / (before - after);
    EXPECT_NEAR(remaining, std::exp(-s / tau), 1.0 / 48.0) << "s = " << s;
  }
  EXPECT_NEAR(w.lockin(t_step + 10 * tau, tau, 1.0).x_v, after, 1e-12);
}

TEST(SimModel, OverloadAtTheInputRange) {
  sim::World w(quiet_scenario());
  const double x = w.true_x_v(50.0);  // 10 nA * ~1.5 kohm * 5 * 100 ~ 7.5 mV
  EXPECT_FALSE(w.lockin(50.0, 0.0, 2.0 * x).overload);
  EXPECT_TRUE(w.lockin(50.0, 0.0, x).overload);  // |X| >= range
}

TEST(SimModel, ReadingsAreDeterministicForASeedAndNoiseHasItsLevel) {
  sim::Scenario s = quiet_scenario();
  s.noise.lockin_x_v = 1e-6;
  s.noise.temperature_rel = 0.01;
  s.seed = 42;
  sim::World a(s), b(s);
  s.seed = 43;
  sim::World c(s);
  int differ = 0;
  for (int i = 0; i < 50; ++i) {
    const double t = 3.7 * i;
    EXPECT_EQ(a.lockin(t, 0.3, 1.0).x_v, b.lockin(t, 0.3, 1.0).x_v);
    EXPECT_EQ(a.thermometer(t).temperature_k, b.thermometer(t).temperature_k);
    differ += a.lockin(t, 0.3, 1.0).x_v != c.lockin(t, 0.3, 1.0).x_v;
  }
  EXPECT_EQ(differ, 50) << "another seed gives other noise";
  // The rms of n = 4000 standard normals has a relative standard error of
  // 1/sqrt(2n) = 1.1%; 5% is > 4 of those. The mean is within 4/sqrt(n).
  const int n = 4000;
  double sum = 0, sum2 = 0;
  for (int i = 0; i < n; ++i) {
    const double z = a.standard_normal(sim::NoiseChannel::lockin_x, 0.1 * i + 0.05);
    sum += z;
    sum2 += z * z;
  }
  EXPECT_NEAR(std::sqrt(sum2 / n), 1.0, 0.05);
  EXPECT_NEAR(sum / n, 0.0, 4.0 / std::sqrt(n));
}

TEST(SimModel, ThermometerStuckRepeatsTheReadingAtTheStart) {
  sim::Scenario s = quiet_scenario();
  s.noise.temperature_rel = 0.01;
  s.faults.stuck.push_back({20.0, 30.0});
  sim::World w(s);
  const double stuck = w.thermometer(20.0).temperature_k;
  EXPECT_EQ(w.thermometer(35.0).temperature_k, stuck);
  EXPECT_EQ(w.thermometer(49.9).temperature_k, stuck);
  EXPECT_NE(w.thermometer(50.05).temperature_k, stuck);
  EXPECT_NE(w.thermometer(19.95).temperature_k, stuck);
}

TEST(SimModel, ProgrammeSweepsBackAndForthBetweenPlusAndMinusBmax) {
  sim::World w(quiet_scenario());
  const auto& sweeps = w.schedule().sweeps();
  ASSERT_EQ(sweeps.size(), 2u);
  // Plateau 0: dwell 100 s, approach 0 -> -0.05 T at 1 mT/s (50 s), sweep 100 s.
  EXPECT_DOUBLE_EQ(sweeps[0].start_s, 150.0);
  EXPECT_DOUBLE_EQ(sweeps[0].end_s, 250.0);
  EXPECT_DOUBLE_EQ(w.magnet().field_t(150.0), -0.05);
  EXPECT_NEAR(w.magnet().field_t(200.0), 0.0, 1e-15);
  EXPECT_DOUBLE_EQ(w.magnet().field_t(250.0), 0.05);
  EXPECT_DOUBLE_EQ(w.magnet().field_t(300.0), 0.0);  // back at zero
  // A set command takes over from the field it had and ramps at the rate.
  w.magnet().set_target(200.0, 0.01, 1e-3);
  EXPECT_TRUE(w.magnet().manual());
  EXPECT_NEAR(w.magnet().field_t(205.0), 0.005, 1e-12);
  EXPECT_NEAR(w.magnet().field_t(400.0), 0.01, 1e-12);
  EXPECT_TRUE(w.magnet().manual_during(190.0, 210.0));
  w.magnet().resume_programme(400.0);
  EXPECT_FALSE(w.magnet().manual());
  EXPECT_FALSE(w.magnet().manual_during(500.0, 600.0));
}

TEST(SimScenarioFile, UnknownKeysAndBadValuesNameTheLineAndTheKey) {
  const char* text =
      "[sample]\nmodel = \"hln2d\"\nwidht_m = 1e-6\n"
      "[programme]\n[[programme.plateau]]\ntemperature_k = 1.0\n";
  auto r = sim::parse_scenario(text, "bad.toml");
  EXPECT_FALSE(r.scenario);
  EXPECT_NE(r.error.find("bad.toml:3"), std::string::npos) << r.error;
  EXPECT_NE(r.error.find("sample.widht_m"), std::string::npos) << r.error;

  r = sim::parse_scenario("[sample]\nmodel = \"hln3d\"\n", "m.toml");
  EXPECT_NE(r.error.find("m.toml:2"), std::string::npos) << r.error;
  EXPECT_NE(r.error.find("hln3d"), std::string::npos) << r.error;

  r = sim::parse_scenario("[sample]\nsquares = \"five\"\n", "t.toml");
  EXPECT_NE(r.error.find("'sample.squares' must be a number"), std::string::npos) << r.error;

  r = sim::parse_scenario(
      "[sample]\nsquares = -1\n[programme]\n[[programme.plateau]]\ntemperature_k = 1.0\n", "v.toml");
  EXPECT_NE(r.error.find("squares"), std::string::npos) << r.error;

  r = sim::parse_scenario("[sample\n", "syntax.toml");
  EXPECT_NE(r.error.find("syntax.toml:1"), std::string::npos) << r.error;

  r = sim::parse_scenario(
      "[sample]\n[programme]\n[[programme.plateau]]\ntemperature_k = 1.0\n"
      "[[fault]]\nkind = \"meteor\"\n",
      "f.toml");
  EXPECT_NE(r.error.find("f.toml:5"), std::string::npos) << r.error;
  EXPECT_NE(r.error.find("meteor"), std::string::npos) << r.error;
}

}  // namespace
