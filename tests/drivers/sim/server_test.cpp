// The real lphi-sim process over loopback TCP: identification, measurement
// queries, the error queue, over-long lines, accelerated time, the faults,
// the truth file and scenario errors. Each wait is bounded; times are read
// from the instruments' own clock (SYST:TIME? and the t field of MEAS:ALL?).
#include <gtest/gtest.h>

#include <chrono>
#include <cmath>
#include <fstream>
#include <nlohmann/json.hpp>
#include <set>
#include <string>

#include "tests/support/sim_process.hpp"

namespace {

using lphi::testing::fields;
using lphi::testing::LineClient;
using lphi::testing::SimProcess;
using namespace std::chrono_literals;
using Clock = std::chrono::steady_clock;

// A film at 1 K with one long dwell, so that the run outlasts every test;
// `faults` is appended as [[fault]] tables.
std::string scenario(const std::string& faults, const std::string& noise = "") {
  return R"(
name = "test-film"
seed = 7
[sample]
model = "hln2d"
squares = 5.0
rsq_ohm = 1500.0
diffusion_m2s = 1e-3
mean_free_path_m = 2e-9
[dephasing]
a_per_s = 2e10
p = 1.0
[lockin]
current_a = 10e-9
gain = 100.0
range_v = 0.01
time_constant_s = 0.0
[noise]
sample_interval_s = 0.1
lockin_x_v = 1e-7
temperature_rel = 0.01
field_t = 1e-6
)" + noise + R"(
[programme]
start_temperature_k = 1.0
[[programme.plateau]]
temperature_k = 1.0
ramp_s = 0
dwell_s = 1e6
sweeps = 1
)" + faults;
}

struct Running {
  SimProcess sim;
  bool ok = false;
  Running(const std::string& text, const std::vector<std::string>& args) {
    ok = sim.start(sim.write_file("scenario.toml", text), args);
  }
};

double sim_time(LineClient& c) {
  const auto r = c.query("SYST:TIME?", 2s);
  return r ? fields(*r).at(0) : std::nan("");
}

TEST(SimServer, IdentifiesAndMeasures) {
  Running run(scenario(""), {"--speed", "100"});
  ASSERT_TRUE(run.ok) << run.sim.stderr_text();
  LineClient lockin, therm, magnet;
  ASSERT_TRUE(lockin.connect(run.sim.port("lockin"), 2s));
  ASSERT_TRUE(therm.connect(run.sim.port("thermometer"), 2s));
  ASSERT_TRUE(magnet.connect(run.sim.port("magnet"), 2s));
  EXPECT_EQ(lockin.query("*IDN?", 2s).value_or(""), "lphi-sim,SIM-LIA,0,0.1");
  EXPECT_EQ(therm.query("*idn?", 2s).value_or(""), "lphi-sim,SIM-THERM,0,0.1");  // case-insensitive
  EXPECT_EQ(magnet.query("*IDN?", 2s).value_or(""), "lphi-sim,SIM-MAGNET,0,0.1");

  // X = I R_sq N g with R_sq = 1/sigma0 at 1 K. By hand from
  // analysis/PHYSICS.md, "Zero-field corrections beyond 2D": the zero-field
  // correction is -Delta(B_tr) with, for B_tr >> B_phi,
  // Delta = ln(B_tr/B_phi) + psi(1/2) (psi(1/2) = -1.9635100260, DLMF
  // 5.4.13), B_tr/B_phi = 2 L_phi^2/l^2, L_phi^2 = D/(A T) = 5e-14 m^2, and
  // e^2/(pi h) = 1.2331471e-5 S. The neglected O(B_phi/B_tr) = 4e-5 term and
  // the 1e-7 V noise (1e-5 relative) are inside the 1e-4 tolerance.
  const double delta = std::log(2.0 * 5e-14 / 4e-18) - 1.9635100260;
  const double expected_x = 10e-9 * 5.0 * 100.0 / (1.0 / 1500.0 - 1.2331471e-5 * delta);
  const auto all = fields(lockin.query("MEASure:ALL?", 2s).value_or(""));
  ASSERT_EQ(all.size(), 4u);
  EXPECT_GE(all[0], 0.0);
  EXPECT_NEAR(all[1] / expected_x, 1.0, 1e-4);
  EXPECT_NEAR(all[2] / all[1], 0.01, 1e-3);
  EXPECT_EQ(all[3], 0.0) << "8.8 mV is inside the 10 mV range";
  EXPECT_NEAR(fields(lockin.query("SOUR:CURR?", 2s).value_or("")).at(0), 10e-9, 1e-20);
  // A 5 mV range overloads (|X| >= range), and the long form works too.
  lockin.send("SENSE:RANGE 5e-3\n");
  EXPECT_EQ(lockin.query("SENS:RANG?", 2s).value_or(""), "0.005");
  EXPECT_EQ(lockin.query("STAT:OVLD?", 2s).value_or(""), "1");
  EXPECT_EQ(fields(lockin.query("MEAS:ALL?", 2s).value_or("")).at(3), 1.0);
  lockin.send("SENS:RANG 0.004\n");  // rounded up to the next 1-2-5 step
  EXPECT_EQ(lockin.query("SENS:RANG?", 2s).value_or(""), "0.005");
  lockin.send("SENS:TCON 0.2\n");
  EXPECT_EQ(lockin.query("SENS:TCON?", 2s).value_or(""), "0.3");

  const auto th = fields(therm.query("MEAS:ALL?", 2s).value_or(""));
  ASSERT_EQ(th.size(), 3u);
  EXPECT_NEAR(th[1], 1.0, 0.05) << "1 K with 1% noise";
  // The invented calibration R = r0 exp(sqrt(t0/T)), defaults 1 kohm and 4 K.
  EXPECT_NEAR(th[2], 1000.0 * std::exp(std::sqrt(4.0 / th[1])), 1e-6 * th[2]);

  auto m = fields(magnet.query("MEAS:ALL?", 2s).value_or(""));
  ASSERT_EQ(m.size(), 5u);
  EXPECT_NEAR(m[1], 0.0, 1e-5) << "the programme dwells at zero field";
  EXPECT_EQ(m[4], 0.0) << "programme mode";
  magnet.send("SOUR:RATE 0.001\n");
  magnet.send("SOUR:TARG 0.02\n");
  EXPECT_EQ(magnet.query("SOUR:MODE?", 2s).value_or(""), "MAN");
  EXPECT_EQ(magnet.query("SOUR:TARG?", 2s).value_or(""), "0.02");
  // At 1 mT/s the field reaches 20 mT after 20 simulated s (0.2 s of wall time).
  const auto deadline = Clock::now() + 5s;
  double field = 0.0;
  while (Clock::now() < deadline && field < 0.02 - 1e-5)
    field = fields(magnet.query("MEAS:FIELD?", 2s).value_or("0")).at(0);
  EXPECT_NEAR(field, 0.02, 1e-5);
  magnet.send("SOUR:MODE PROG\n");
  EXPECT_EQ(magnet.query("SOUR:MODE?", 2s).value_or(""), "PROG");
  EXPECT_EQ(run.sim.stop(), 0) << "SIGTERM gives a clean exit";
}

TEST(SimServer, ErrorQueueAndOverLongLines) {
  Running run(scenario(""), {"--speed", "100"});
  ASSERT_TRUE(run.ok) << run.sim.stderr_text();
  LineClient c;
  ASSERT_TRUE(c.connect(run.sim.port("lockin"), 2s));
  EXPECT_EQ(c.query("SYST:ERR?", 2s).value_or(""), "0,\"No error\"");
  c.send("FOO:BAR 1\n");  // a set command: no reply, the error is queued
  EXPECT_EQ(c.query("MEAS:BOGUS?", 2s).value_or(""), "ERR -113,\"Undefined header;MEAS:BOGUS?\"");
  c.send("SENS:RANG 7\n");  // above 1 V
  c.send("SENS:TCON fast\n");
  EXPECT_EQ(c.query("SYST:ERR?", 2s).value_or(""), "-113,\"Undefined header;FOO:BAR\"");
  EXPECT_EQ(c.query("SYST:ERR?", 2s).value_or(""), "-113,\"Undefined header;MEAS:BOGUS?\"");
  EXPECT_EQ(c.query("SYST:ERR?", 2s).value_or(""), "-222,\"Data out of range;7\"");
  EXPECT_EQ(c.query("SYST:ERR?", 2s).value_or(""), "-104,\"Data type error;fast\"");
  EXPECT_EQ(c.query("SYST:ERR?", 2s).value_or(""), "0,\"No error\"");

  // 300 bytes (> 256) in several pieces: one ERR reply, the line is
  // discarded, and the connection goes on working.
  c.send(std::string(100, 'A'));
  c.send(std::string(100, 'A'));
  c.send(std::string(100, 'A') + "?\n");
  EXPECT_EQ(c.query("*IDN?", 2s).has_value(), true);
  // The ERR reply comes first, then *IDN?'s: read back in order.
  LineClient d;
  ASSERT_TRUE(d.connect(run.sim.port("lockin"), 2s));
  EXPECT_EQ(d.query(std::string(300, 'B'), 2s).value_or("").rfind("ERR -223,", 0), 0u);
  EXPECT_EQ(d.query("*IDN?", 2s).value_or(""), "lphi-sim,SIM-LIA,0,0.1");
  d.send("*CLS\n");
  // The queue holds 16; the 16th entry becomes -350 "Queue overflow".
  for (int i = 0; i < 20; ++i) d.send("NOPE\n");
  std::vector<std::string> errors;
  for (int i = 0; i < 17; ++i) errors.push_back(d.query("SYST:ERR?", 2s).value_or(""));
  EXPECT_EQ(errors[0].rfind("-113,", 0), 0u);
  EXPECT_EQ(errors[15], "-350,\"Queue overflow\"");
  EXPECT_EQ(errors[16], "0,\"No error\"");
  EXPECT_EQ(run.sim.stop(), 0);
}

TEST(SimServer, AcceleratedTimeRunsAtTheRequestedSpeed) {
  Running run(scenario(""), {"--speed", "250"});
  ASSERT_TRUE(run.ok) << run.sim.stderr_text();
  LineClient c;
  ASSERT_TRUE(c.connect(run.sim.port("thermometer"), 2s));
  EXPECT_EQ(c.query("SYST:SPEED?", 2s).value_or(""), "250");
  // Simulated time against this process's steady clock over >= 0.4 s of wall
  // time; each stamp is uncertain by one loopback round trip (well under
  // 10 ms), so the measured speed is within 5%.
  const auto w0 = Clock::now();
  const double t0 = sim_time(c);
  const auto w0b = Clock::now();
  double t1 = t0;
  Clock::time_point w1, w1b;
  do {
    w1 = Clock::now();
    t1 = sim_time(c);
    w1b = Clock::now();
  } while (w1 - w0 < 400ms && std::isfinite(t1));
  const double wall = std::chrono::duration<double>((w1 + (w1b - w1) / 2) - (w0 + (w0b - w0) / 2)).count();
  EXPECT_NEAR((t1 - t0) / wall, 250.0, 0.05 * 250.0);
  // The t field of every MEAS:ALL? is the same clock and never goes back.
  double last = -1;
  for (int i = 0; i < 20; ++i) {
    const double t = fields(c.query("MEAS:ALL?", 2s).value_or("nan")).at(0);
    EXPECT_GE(t, last);
    last = t;
  }
  EXPECT_EQ(run.sim.stop(), 0);
}

TEST(SimServer, LockinDropoutClosesConnectionsForItsDuration) {
  // Dropout over simulated [40, 90) s, at 100x: 0.4 to 0.9 s of wall time.
  Running run(scenario("[[fault]]\nkind = \"lockin-dropout\"\nstart_s = 40\nduration_s = 50\n"),
              {"--speed", "100"});
  ASSERT_TRUE(run.ok) << run.sim.stderr_text();
  LineClient lockin, clock;
  ASSERT_TRUE(clock.connect(run.sim.port("thermometer"), 2s));
  ASSERT_TRUE(lockin.connect(run.sim.port("lockin"), 2s));
  double last_answer = -1;
  const auto deadline = Clock::now() + 10s;
  while (Clock::now() < deadline) {
    const auto r = lockin.query("MEAS:ALL?", 1s);
    if (!r) break;
    last_answer = fields(*r).at(0);
  }
  const double lost_at = sim_time(clock);
  EXPECT_TRUE(lockin.closed()) << "the server closed the connection";
  EXPECT_LT(last_answer, 41.0);  // the tick that closes runs every 0.2 simulated s
  EXPECT_GE(lost_at, 40.0);
  // Reconnecting during the dropout: accepted, then closed at once.
  double back_at = -1;
  while (Clock::now() < deadline) {
    LineClient again;
    if (!again.connect(run.sim.port("lockin"), 1s)) continue;
    const auto r = again.query("MEAS:ALL?", 1s);
    if (r) {
      back_at = fields(*r).at(0);
      break;
    }
    EXPECT_LT(sim_time(clock), 91.0) << "refused only during the dropout";
  }
  EXPECT_GE(back_at, 90.0);
  EXPECT_LT(back_at, 150.0);
  EXPECT_EQ(run.sim.stop(), 0);
}

TEST(SimServer, SilentLockinDropoutAnswersNothingButKeepsTheConnection) {
  Running run(scenario("[[fault]]\nkind = \"lockin-dropout\"\nstart_s = 30\nduration_s = 60\n"
                       "mode = \"silent\"\n"),
              {"--speed", "100"});
  ASSERT_TRUE(run.ok) << run.sim.stderr_text();
  LineClient lockin, clock;
  ASSERT_TRUE(clock.connect(run.sim.port("thermometer"), 2s));
  ASSERT_TRUE(lockin.connect(run.sim.port("lockin"), 2s));
  int unanswered = 0;
  double answered_after = -1;
  const auto deadline = Clock::now() + 10s;
  while (Clock::now() < deadline) {
    // A line is dropped when it arrives inside [30, 90) s: it was sent at or
    // after `sent` (one loopback hop, < 0.5 simulated s at 100x, earlier).
    const double sent = sim_time(clock);
    const auto r = lockin.query("MEAS:ALL?", 100ms);
    if (!r) {
      EXPECT_GE(sent, 29.5);
      EXPECT_LT(sent, 90.0);
      ++unanswered;
      continue;
    }
    if (unanswered > 0) {
      answered_after = fields(*r).at(0);
      break;
    }
  }
  EXPECT_GT(unanswered, 0);
  EXPECT_FALSE(lockin.closed());
  EXPECT_GE(answered_after, 90.0);
  EXPECT_EQ(run.sim.stop(), 0);
}

TEST(SimServer, ThermometerStuckRepeatsItsLastValue) {
  Running run(scenario("[[fault]]\nkind = \"thermometer-stuck\"\nstart_s = 30\nduration_s = 40\n"),
              {"--speed", "100"});
  ASSERT_TRUE(run.ok) << run.sim.stderr_text();
  LineClient c;
  ASSERT_TRUE(c.connect(run.sim.port("thermometer"), 2s));
  std::set<double> inside, outside;
  const auto deadline = Clock::now() + 10s;
  double t = 0;
  while (Clock::now() < deadline && t < 100.0) {
    const auto f = fields(c.query("MEAS:ALL?", 2s).value_or("nan,nan,nan"));
    t = f.at(0);
    if (t >= 30.0 && t < 70.0) inside.insert(f.at(1));
    else outside.insert(f.at(1));
  }
  // 1% noise redrawn every 0.1 simulated s: outside the window readings
  // differ; inside it every reading is the one taken at the start.
  EXPECT_EQ(inside.size(), 1u);
  EXPECT_GT(outside.size(), 10u);
  EXPECT_EQ(run.sim.stop(), 0);
}

TEST(SimServer, PeriodicConnectionResets) {
  // Every connection to every instrument is closed at 25, 75, 125... s.
  Running run(scenario("[[fault]]\nkind = \"connection-reset\"\nat_s = 25\nperiod_s = 50\n"),
              {"--speed", "100"});
  ASSERT_TRUE(run.ok) << run.sim.stderr_text();
  int resets_seen = 0;
  const auto deadline = Clock::now() + 10s;
  while (Clock::now() < deadline && resets_seen < 2) {
    LineClient c;
    if (!c.connect(run.sim.port("magnet"), 1s)) continue;
    double first = -1, last = -1;
    while (true) {
      const auto r = c.query("SYST:TIME?", 1s);
      if (!r) break;
      last = fields(*r).at(0);
      if (first < 0) first = last;
    }
    ASSERT_TRUE(c.closed());
    if (first < 0) continue;  // closed before the first answer
    // The reset that closed it lies in (first, last + one tick (0.2 s) + slack].
    const double n = std::ceil((first - 25.0) / 50.0);
    const double reset = 25.0 + std::max(0.0, n) * 50.0;
    EXPECT_GE(reset, first - 0.5);
    EXPECT_LE(reset, last + 1.0);
    ++resets_seen;
  }
  EXPECT_EQ(resets_seen, 2);
  EXPECT_EQ(run.sim.stop(), 0);
}

TEST(SimServer, RunsAWholeProgrammeAndWritesTheTruth) {
  // Two plateaus of 2 sweeps each (ramp 10 + dwell 10 + 5 + 2 x 10 + 5 s = 50 s
  // per plateau) at 200x: about half a second, then lphi-sim exits by itself.
  const std::string text = R"(
name = "short"
[sample]
model = "hln2d"
[programme]
start_temperature_k = 0.5
ramp_s = 10
dwell_s = 10
sweeps = 2
max_field_t = 0.005
rate_t_per_s = 0.001
[[programme.plateau]]
temperature_k = 0.5
[[programme.plateau]]
temperature_k = 0.1
[[fault]]
kind = "electron-heating"
start_s = 0
floor_k = 0.2
exponent = 2
)";
  Running run(text, {"--speed", "200"});
  ASSERT_TRUE(run.ok) << run.sim.stderr_text();
  EXPECT_EQ(run.sim.wait(20s), 0) << run.sim.stderr_text();
  std::ifstream in(run.sim.truth_path());
  std::vector<nlohmann::json> records;
  for (std::string line; std::getline(in, line);) records.push_back(nlohmann::json::parse(line));
  ASSERT_EQ(records.size(), 1u + 4u + 2u);  // scenario, 4 sweeps, 2 plateaus
  EXPECT_EQ(records[0]["record"], "scenario");
  EXPECT_EQ(records[0]["sample"]["model"], "hln2d");
  int sweeps = 0;
  for (const auto& r : records) {
    if (r["record"] != "sweep") continue;
    ++sweeps;
    EXPECT_DOUBLE_EQ(double(r["end_s"]) - double(r["start_s"]), 10.0);
    // Heating: T_e = sqrt(T^2 + 0.2^2) (k = 2).
    const double t = r["temperature_k"];
    EXPECT_NEAR(double(r["electron_temperature_k"]), std::hypot(t, 0.2), 1e-12);
    EXPECT_TRUE(r["heating"].get<bool>());
    EXPECT_FALSE(r["manual_field"].get<bool>());
  }
  EXPECT_EQ(sweeps, 4);
}

TEST(SimServer, RejectsABadScenarioNamingTheLineAndKey) {
  Running run(scenario("") + "[magnet]\nlimit_t = 1.0\nmax_ramp = 2\n", {});
  EXPECT_FALSE(run.ok);
  EXPECT_NE(run.sim.stderr_text().find("unknown key 'magnet.max_ramp'"), std::string::npos)
      << run.sim.stderr_text();
}

}  // namespace
