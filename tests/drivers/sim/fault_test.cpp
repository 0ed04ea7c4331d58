// lphi-sim's measurement faults (drivers/sim/COMMANDS.md, "Faults"): each
// fault's effect on what the instruments read, checked against the fault's
// own formula with the parameters read back from the truth file's records
// (never a copy of the number), and the scenario file's checks of each
// fault's keys. The shipped fault_*.toml scenarios are fault_free.toml plus
// one fault.
#include <gtest/gtest.h>

#include <cmath>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "drivers/sim/instruments.hpp"
#include "drivers/sim/recording.hpp"
#include "drivers/sim/scenario_file.hpp"
#include "drivers/sim/truth_file.hpp"
#include "drivers/sim/world.hpp"

namespace {

using namespace lphi;
using nlohmann::json;

// A small programme: two plateaus (1 K, 0.5 K), one -50 -> +50 mT sweep each
// at 1 mT/s after a 100 s dwell; the sample is the film of
// no_saturation.toml.
sim::Scenario quiet() {
  sim::Scenario s;
  s.sample.model = mc::Model::hln2d;
  s.dephasing = {0.0, 2e10, 1.0};
  s.programme.start_temperature_k = 1.0;
  s.programme.plateaus = {sim::Plateau{1.0, 0.0, 100.0, 1, 0.05, 1e-3},
                          sim::Plateau{0.5, 100.0, 100.0, 2, 0.05, 1e-3}};
  s.lockin.time_constant_s = 0.0;
  s.noise.sample_interval_s = 0.1;
  return s;
}

json scenario_truth(const sim::World& w) { return json::parse(sim::truth::scenario_record(w.scenario())); }

json fault_of(const json& head, const std::string& kind) {
  for (const auto& f : head["faults"])
    if (f["kind"] == kind) return f;
  ADD_FAILURE() << "no " << kind << " fault in the truth's scenario record " << head.dump();
  return json::object();
}

json sweep_truth(const sim::World& w, std::size_t i) {
  return json::parse(sim::truth::sweep_record(w, w.schedule().sweeps().at(i)));
}

std::string load_error(const std::string& toml_fault) {
  const std::string text =
      "[sample]\n[programme]\n[[programme.plateau]]\ntemperature_k = 1.0\n[[fault]]\n" + toml_fault;
  const auto r = sim::parse_scenario(text, "faults.toml");
  EXPECT_FALSE(r.scenario) << "accepted: " << toml_fault;
  return r.error;
}

TEST(SimFaults, RemanentFieldMovesTheCuspToMinusBrInTheReading) {
  // The field at the sample is the reading + B_r, so the sample's
  // conductance at a reading b is that at b + B_r (drivers/sim/sample_model.hpp's
  // formula, exact), and weak localization's resistance maximum (the cusp at
  // true B = 0, HLN: Delta sigma grows with |B|) is at the reading -B_r.
  sim::Scenario s = quiet();
  s.faults.remanences.push_back({0.002, 0.0});
  const sim::World w(s);
  const double b_r = fault_of(scenario_truth(w), "remanent-field")["field_t"];
  EXPECT_EQ(double(sweep_truth(w, 0)["field_offset_t"]), b_r);
  const auto& sweep = w.schedule().sweeps()[0];
  double best_t = 0.0, best_x = -1.0;
  for (double t = sweep.start_s; t <= sweep.end_s; t += 0.01) {
    const double reading = w.magnet().field_t(t);  // noise-free: noise.field_t = 0
    EXPECT_EQ(w.field_reading_t(t), reading);
    const double expected = sim::sheet_conductance_s(s.sample, s.dephasing, reading + b_r,
                                                     w.electron_temperature_k(t));
    ASSERT_NEAR(w.sheet_conductance_s(t) / expected, 1.0, 1e-15) << "t = " << t;
    if (const double x = w.true_x_v(t); x > best_x) {
      best_x = x;
      best_t = t;
    }
  }
  // The grid steps the field by 10 uT.
  EXPECT_NEAR(w.magnet().field_t(best_t), -b_r, 1e-5);
}

TEST(SimFaults, RemanentFieldStartsAtItsTime) {
  sim::Scenario s = quiet();
  s.faults.remanences.push_back({0.001, 400.0});
  const sim::World w(s);
  EXPECT_EQ(w.remanent_field_t(399.0), 0.0);
  EXPECT_EQ(w.remanent_field_t(400.0), 0.001);
  EXPECT_EQ(double(sweep_truth(w, 0)["field_offset_t"]), 0.0);  // plateau 0's sweep: 150-250 s
  EXPECT_EQ(double(sweep_truth(w, 1)["field_offset_t"]), 0.001);
}

TEST(SimFaults, LaggedReadingIsTheFieldDelayEarlier) {
  // The reading at t equals the magnet's field delay_s earlier within the
  // reading's noise (4 standard deviations: 1 in 16 000 readings beyond,
  // and 2000 are checked).
  sim::Scenario s = quiet();
  s.noise.field_t = 2e-6;
  s.faults.field_lag_s = 1.0;
  const sim::World w(s);
  const double delay = fault_of(scenario_truth(w), "field-reading-lag")["delay_s"];
  EXPECT_EQ(double(sweep_truth(w, 0)["field_lag_s"]), delay);
  const double sigma = scenario_truth(w)["noise"]["field_t"];
  int far_from_now = 0;
  for (int i = 0; i < 1800; ++i) {
    const double t = 151.5 + 0.05 * i;  // the first sweep, 1 mT/s
    EXPECT_NEAR(w.field_reading_t(t), w.magnet().field_t(t - delay), 4 * sigma) << "t = " << t;
    far_from_now += std::abs(w.field_reading_t(t) - w.magnet().field_t(t)) > 100 * sigma;
  }
  EXPECT_EQ(far_from_now, 1800) << "1 s at 1 mT/s is 1 mT, 500 noise sigmas";
}

TEST(SimFaults, RaisedTimeConstantFiltersAsAFirstOrderFilterAndIsReported) {
  // Inside the window the lock-in filters with the fault's tau: after a step
  // the reading relaxes as exp(-s/tau) (a first-order low-pass, common
  // practice), quantised to 1/48 by the 48-node filter. SENS:TCON? reports
  // the raised tau inside the window and the setting outside.
  sim::Scenario s = quiet();
  s.lockin.time_constant_s = 0.03;
  s.faults.time_constants.push_back({{300.0, 100.0}, 1.0});
  sim::World w(s);
  const auto& f = fault_of(scenario_truth(w), "lockin-time-constant");
  const double tau = f["time_constant_s"];
  const double t_step = w.schedule().plateaus()[1].ramp_start_s;  // 300 s: the temperature ramp starts
  ASSERT_GE(t_step, double(f["start_s"]));
  EXPECT_EQ(w.lockin_time_constant_s(t_step + 1.0, 0.03), tau);
  EXPECT_EQ(w.lockin_time_constant_s(t_step - 1.0, 0.03), 0.03);
  EXPECT_EQ(w.lockin_time_constant_s(double(f["start_s"]) + double(f["duration_s"]), 0.03), 0.03);

  sim::SimInstrument lockin(sim::Instrument::lockin, w, 1.0);
  EXPECT_EQ(std::stod(lockin.execute("SENS:TCON?", 350.0).value_or("nan")), tau);
  EXPECT_EQ(std::stod(lockin.execute("SENS:TCON?", 250.0).value_or("nan")), 0.03);

  // The ramp is linear in T: X changes linearly, and a first-order filter
  // on a ramp lags it by exactly tau once settled (the convolution of a
  // ramp with exp(-s/tau)/tau). 10 tau into the ramp the transient is
  // e^-10; the 48-node midpoint rule puts the lag at the mean of
  // -ln(1 - u_i), 1 % from tau.
  const double t = t_step + 10 * tau;
  const double slope = (w.true_x_v(t + 0.5) - w.true_x_v(t - 0.5));
  const double lag_s = (w.true_x_v(t) - w.lockin(t, 0.03, 1.0).x_v) / slope;
  EXPECT_NEAR(lag_s / tau, 1.0, 0.02);
  // The recording writes the tau in effect beside each reading.
  const sim::Recorder rec(w, {}, 1.0, 0.03);
  EXPECT_EQ(rec.at(350.0, false).time_constant_s, tau);
  EXPECT_EQ(rec.at(250.0, false).time_constant_s, 0.03);
  EXPECT_EQ(rec.at(350.0, false).lockin.x_v, w.lockin(350.0, 0.03, 1.0).x_v);
}

TEST(SimFaults, HoleTakesTheLockinAwayInItsFieldRangeAndWindowOnly) {
  sim::Scenario s = quiet();
  s.faults.holes.push_back({{400.0, 250.0}, -0.02, 0.04});  // plateau 1's first sweep (550-650 s)
  const sim::World w(s);
  const auto& f = fault_of(scenario_truth(w), "lockin-hole");
  const double from = f["from_t"], to = f["to_t"];
  sim::RecordingOptions one_hz;
  one_hz.rate_hz = 1.0;
  const sim::Recorder rec(w, one_hz, 1.0, 0.0);
  int in_hole = 0;
  for (std::int64_t k = 0; k < rec.rows(); ++k) {
    const auto row = rec.row(k);
    const double b = w.magnet().field_t(row.t_s);
    const bool expected_hole = row.t_s >= 400.0 && row.t_s < 650.0 && b >= from && b <= to;
    EXPECT_EQ(row.has_lockin, !expected_hole) << "t = " << row.t_s << ", B = " << b;
    in_hole += expected_hole;
  }
  // In the window the field is in the range during the dwell at zero field
  // (400-500 s), the approach down to -20 mT (20 s) and the sweep from -20 to
  // +40 mT (60 s): 180 s at 1 Hz, 182 rows with the ends (rounding at the
  // range's edges may drop one or two).
  EXPECT_GE(in_hole, 180);
  EXPECT_LE(in_hole, 182);
  EXPECT_FALSE(sweep_truth(w, 0)["lockin_hole"]);
  const auto hit = sweep_truth(w, 1);
  EXPECT_TRUE(hit["lockin_hole"]);
  EXPECT_FALSE(sweep_truth(w, 2)["lockin_hole"]) << "starts as the window ends";
  EXPECT_EQ(double(hit["hole_from_t"]), from);
  EXPECT_EQ(double(hit["hole_to_t"]), to);
}

TEST(SimFaults, OneWaySweepsGoUpAndReturnTwentyTimesFaster) {
  sim::Scenario s = quiet();
  for (auto& p : s.programme.plateaus) p.sweep_mode = sim::SweepMode::up;
  s.programme.plateaus[1].sweeps = 3;
  const sim::World w(s);
  const auto& sweeps = w.schedule().sweeps();
  ASSERT_EQ(sweeps.size(), 4u);
  for (std::size_t i = 0; i < sweeps.size(); ++i) {
    const auto t = sweep_truth(w, i);
    EXPECT_EQ(double(t["from_t"]), -0.05);
    EXPECT_EQ(double(t["to_t"]), 0.05);
    EXPECT_EQ(w.magnet().field_t(sweeps[i].start_s), -0.05);
    EXPECT_EQ(w.magnet().field_t(sweeps[i].end_s), 0.05);
    EXPECT_NEAR(w.schedule().field_rate_t_per_s(0.5 * (sweeps[i].start_s + sweeps[i].end_s)), 1e-3, 1e-15);
  }
  // Between plateau 1's sweeps: +B -> -B at 20 x 1 mT/s, 5 s.
  EXPECT_DOUBLE_EQ(sweeps[2].start_s - sweeps[1].end_s, 0.1 / (sim::kFastReturnFactor * 1e-3));
  EXPECT_NEAR(w.schedule().field_rate_t_per_s(sweeps[1].end_s + 1.0), 0.02, 1e-12);
  EXPECT_NEAR(w.magnet().field_t(sweeps[1].end_s + 2.5), 0.0, 1e-12);
  EXPECT_EQ(w.magnet().field_t(w.schedule().plateaus()[1].end_s), 0.0);
  const auto plateau = json::parse(sim::truth::plateau_record(w, w.schedule().plateaus()[0]));
  EXPECT_EQ(plateau["sweep_mode"], "up");
}

TEST(SimFaults, UnipolarLegsRunFromZeroToBmaxAndBack) {
  sim::Scenario s = quiet();
  for (auto& p : s.programme.plateaus) p.sweep_mode = sim::SweepMode::unipolar;
  s.programme.plateaus[0].sweeps = 3;  // ends at +B_max: the field returns to 0 after
  const sim::World w(s);
  const auto& sweeps = w.schedule().sweeps();
  ASSERT_EQ(sweeps.size(), 5u);
  const double expected[5][2] = {{0, 0.05}, {0.05, 0}, {0, 0.05}, {0, 0.05}, {0.05, 0}};
  for (std::size_t i = 0; i < sweeps.size(); ++i) {
    EXPECT_EQ(w.magnet().field_t(sweeps[i].start_s), expected[i][0]) << i;
    EXPECT_EQ(w.magnet().field_t(sweeps[i].end_s), expected[i][1]) << i;
    EXPECT_DOUBLE_EQ(sweeps[i].end_s - sweeps[i].start_s, 50.0) << "50 mT at 1 mT/s";
    EXPECT_GE(w.magnet().field_t(0.5 * (sweeps[i].start_s + sweeps[i].end_s)), 0.0);
  }
  EXPECT_EQ(sweeps[0].start_s, 100.0) << "the first leg starts at zero field after the dwell";
  EXPECT_EQ(w.magnet().field_t(w.schedule().plateaus()[0].end_s), 0.0);
}

TEST(SimFaults, PlateauDriftIsLinearAndTheTruthIsAtTheSweepsMeanTemperature) {
  // The bath goes from T_p to T_p (1 + r) across the plateau's sweeps. The
  // truth's temperature is the sweep's mean bath temperature (integrated
  // here with Simpson's rule, exact for a linear drift) and its L_phi is
  // sqrt(D / (A T_mean^p)) (drivers/sim/sample_model.hpp).
  sim::Scenario s = quiet();
  s.faults.plateau_drift_relative = 0.03;
  const sim::World w(s);
  const json head = scenario_truth(w);
  const double r = fault_of(head, "plateau-drift")["relative"];
  const auto& p = w.schedule().plateaus()[1];
  EXPECT_NEAR(w.bath_temperature_k(p.sweeps_start_s), p.temperature_k, 1e-15);
  EXPECT_NEAR(w.bath_temperature_k(p.sweeps_end_s - 1e-9), p.temperature_k * (1 + r), 1e-12);
  for (std::size_t i = 0; i < w.schedule().sweeps().size(); ++i) {
    const auto& sw = w.schedule().sweeps()[i];
    const auto truth = sweep_truth(w, i);
    const int n = 1000;
    double sum = 0.0;
    for (int k = 0; k <= n; ++k) {
      const double wk = (k == 0 || k == n) ? 1.0 : (k % 2 ? 4.0 : 2.0);
      sum += wk * w.bath_temperature_k(sw.start_s + (sw.end_s - sw.start_s) * k / n);
    }
    const double mean = sum / (3.0 * n);
    EXPECT_NEAR(double(truth["temperature_k"]) / mean, 1.0, 1e-12);
    EXPECT_NEAR(double(truth["temperature_end_k"]) - double(truth["temperature_start_k"]),
                sw.plateau == 1 ? 0.5 * r * p.temperature_k : r * 1.0, 1e-12)
        << "plateau 0 has one sweep, plateau 1 two: each drifts by its share";
    const double lphi = std::sqrt(double(head["sample"]["diffusion_m2s"]) /
                                  (double(head["dephasing"]["a_per_s"]) * mean));
    EXPECT_NEAR(double(truth["lphi_m"]) / lphi, 1.0, 1e-12);
  }
  // The thermometer shows the drift (noise-free here).
  EXPECT_NEAR(w.thermometer(p.sweeps_end_s - 1e-9).temperature_k, p.temperature_k * (1 + r), 1e-12);
}

TEST(SimFaults, GainDriftScalesXLinearlyInTime) {
  sim::Scenario s = quiet();
  sim::Scenario drifting = s;
  drifting.faults.gain_drift_per_hour = 0.01;
  drifting.faults.gain_drift_start_s = 100.0;
  const sim::World plain(s), w(drifting);
  const auto& f = fault_of(scenario_truth(w), "gain-drift");
  const double per_hour = f["per_hour"], start = f["start_s"];
  for (double t : {50.0, 100.0, 200.0, 333.3, 599.0}) {
    const double factor = t < start ? 1.0 : 1.0 + per_hour * (t - start) / 3600.0;
    EXPECT_NEAR(w.lockin(t, 0.0, 1.0).x_v / plain.lockin(t, 0.0, 1.0).x_v, factor, 1e-14) << t;
    EXPECT_NEAR(w.lockin(t, 0.0, 1.0).y_v / plain.lockin(t, 0.0, 1.0).y_v, factor, 1e-14) << t;
  }
  const auto t1 = sweep_truth(w, 1);
  const double mid = 0.5 * (double(t1["start_s"]) + double(t1["end_s"]));
  EXPECT_NEAR(double(t1["gain_factor"]), 1.0 + per_hour * (mid - start) / 3600.0, 1e-15);
}

TEST(SimFaults, SpikesComeAtTheirRateWithTheirSize) {
  // Over n = 200 000 noise intervals the number of spikes is binomial
  // (n, p): within 5 of its standard deviations sqrt(n p (1 - p)). Each is
  // exactly +-size_sigma * noise.lockin_x_v on X (the same world without
  // the fault reads the rest), and Y is untouched; the signs are a fair
  // coin (within 5 standard deviations).
  sim::Scenario s = quiet();
  s.noise.lockin_x_v = 2e-8;
  sim::Scenario spiky = s;
  spiky.faults.spike_probability = 0.002;
  spiky.faults.spike_size_sigma = 50.0;
  const sim::World plain(s), w(spiky);
  const auto& f = fault_of(scenario_truth(w), "spikes");
  const double p = f["probability"];
  const double size = double(f["size_sigma"]) * double(scenario_truth(w)["noise"]["lockin_x_v"]);
  EXPECT_EQ(double(f["size_v"]), size);
  const int n = 200000;
  int spikes = 0, positive = 0;
  for (int i = 0; i < n; ++i) {
    const double t = 0.1 * i + 0.05;
    const double d = w.lockin(t, 0.0, 1.0).x_v - plain.lockin(t, 0.0, 1.0).x_v;
    EXPECT_EQ(w.lockin(t, 0.0, 1.0).y_v, plain.lockin(t, 0.0, 1.0).y_v);
    if (d == 0.0) continue;
    ++spikes;
    positive += d > 0;
    EXPECT_NEAR(std::abs(d), size, 1e-12 * size + 1e-18) << "t = " << t;
  }
  const double mean = n * p, sd = std::sqrt(n * p * (1 - p));
  EXPECT_NEAR(spikes, mean, 5 * sd);
  EXPECT_NEAR(positive, 0.5 * spikes, 5 * std::sqrt(0.25 * spikes));
}

TEST(SimFaults, BadFaultValuesNameTheKeyAndTheFile) {
  std::string e = load_error("kind = \"remanent-field\"\nfield_t = 0.5\n");
  EXPECT_NE(e.find("faults.toml"), std::string::npos) << e;
  EXPECT_NE(e.find("field_t"), std::string::npos) << e;
  e = load_error("kind = \"remanent-field\"\n");
  EXPECT_NE(e.find("needs 'fault.field_t'"), std::string::npos) << e;
  e = load_error("kind = \"field-reading-lag\"\ndelay_s = -1\n");
  EXPECT_NE(e.find("delay_s"), std::string::npos) << e;
  e = load_error("kind = \"field-reading-lag\"\ndelay_s = 1\n[[fault]]\nkind = \"field-reading-lag\"\ndelay_s = 2\n");
  EXPECT_NE(e.find("only one field-reading-lag"), std::string::npos) << e;
  e = load_error("kind = \"lockin-time-constant\"\ntime_constant_s = 0\n");
  EXPECT_NE(e.find("time_constant_s"), std::string::npos) << e;
  e = load_error("kind = \"lockin-hole\"\nfrom_t = 0.04\nto_t = -0.02\n");
  EXPECT_NE(e.find("from_t < to_t"), std::string::npos) << e;
  e = load_error("kind = \"lockin-hole\"\nfrom_t = 0.04\n");
  EXPECT_NE(e.find("needs 'fault.to_t'"), std::string::npos) << e;
  e = load_error("kind = \"plateau-drift\"\nrelative = 0.7\n");
  EXPECT_NE(e.find("relative"), std::string::npos) << e;
  e = load_error("kind = \"gain-drift\"\nper_hour = \"fast\"\n");
  EXPECT_NE(e.find("'fault.per_hour' must be a number"), std::string::npos) << e;
  e = load_error("kind = \"spikes\"\nprobability = 0.002\nsize_sigma = 50\n");
  EXPECT_NE(e.find("noise.lockin_x_v"), std::string::npos) << e << " (the noise is 0 here)";
  e = load_error("kind = \"spikes\"\nprobability = 0.5\nsize_sigma = 50\n");
  EXPECT_NE(e.find("probability"), std::string::npos) << e;
  e = load_error("kind = \"remanent-field\"\nfield_t = 0.001\nsize = 2\n");
  EXPECT_NE(e.find("fault.size"), std::string::npos) << e;
  auto r = sim::parse_scenario(
      "[sample]\n[programme]\nsweep_mode = \"sideways\"\n[[programme.plateau]]\ntemperature_k = 1.0\n",
      "mode.toml");
  EXPECT_NE(r.error.find("mode.toml:3"), std::string::npos) << r.error;
  EXPECT_NE(r.error.find("programme.sweep_mode"), std::string::npos) << r.error;
  r = sim::parse_scenario(
      "[sample]\n[magnet]\nmax_rate_t_per_s = 0.001\n[programme]\n[[programme.plateau]]\n"
      "temperature_k = 1.0\nrate_t_per_s = 1e-4\nsweep_mode = \"up\"\n",
      "fast.toml");
  EXPECT_NE(r.error.find("sweep_mode up returns"), std::string::npos) << r.error;
}

TEST(SimFaults, ShippedFaultScenariosAreTheFaultFreeOneWithOneFault) {
  // The end-to-end tests compare each fault scenario's verdict with
  // fault_free.toml's: that holds only if nothing else differs.
  const std::string dir = std::string(LPHI_SOURCE_DIR) + "/drivers/sim/scenarios/";
  const auto base = sim::load_scenario_file(dir + "fault_free.toml");
  ASSERT_TRUE(base.scenario) << base.error;
  const json base_truth = json::parse(sim::truth::scenario_record(*base.scenario));
  EXPECT_TRUE(base_truth["faults"].empty());
  for (const char* name : {"fault_remanent_field", "fault_remanent_field_small", "fault_field_lag",
                           "fault_lockin_time_constant", "fault_lockin_hole", "fault_plateau_drift",
                           "fault_one_way", "fault_unipolar", "fault_gain_drift", "fault_spikes"}) {
    SCOPED_TRACE(name);
    const auto loaded = sim::load_scenario_file(dir + name + ".toml");
    ASSERT_TRUE(loaded.scenario) << loaded.error;
    json truth = json::parse(sim::truth::scenario_record(*loaded.scenario));
    const bool programme_fault = std::string(name) == "fault_one_way" || std::string(name) == "fault_unipolar";
    EXPECT_EQ(truth["faults"].size(), programme_fault ? 0u : 1u);
    for (const char* key : {"sample", "dephasing", "lockin", "noise", "heating"})
      EXPECT_EQ(truth[key], base_truth[key]) << key;
    const auto& a = base.scenario->programme.plateaus;
    const auto& b = loaded.scenario->programme.plateaus;
    ASSERT_EQ(a.size(), b.size());
    for (std::size_t i = 0; i < a.size(); ++i) {
      EXPECT_EQ(a[i].temperature_k, b[i].temperature_k);
      EXPECT_EQ(a[i].max_field_t, b[i].max_field_t);
      EXPECT_EQ(a[i].rate_t_per_s, b[i].rate_t_per_s);
      EXPECT_EQ(a[i].sweeps, b[i].sweeps);
      EXPECT_EQ(a[i].sweep_mode == b[i].sweep_mode, !programme_fault);
    }
  }
}

}  // namespace
