// `lphi-sim --record`: the recording is the served instruments' readings at
// the recording's times, its truth file is the served run's, and a noise-free
// recording follows the analysis library's forward models.
#include <gtest/gtest.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <regex>
#include <set>
#include <string>
#include <thread>
#include <vector>

#include "analysis/magnetoconductance.hpp"
#include "drivers/sim/instruments.hpp"
#include "drivers/sim/recording.hpp"
#include "drivers/sim/scenario_file.hpp"
#include "tests/scenarios/recording_csv.hpp"
#include "tests/support/daemon_process.hpp"
#include "tests/support/sim_process.hpp"
#include "tests/support/temp_dir.hpp"

namespace {

using namespace std::chrono_literals;
using lphi::testing::read_recording;
using lphi::testing::run_program;
using lphi::testing::slurp_file;

std::string scenario_path(const std::string& name) {
  return std::string(LPHI_SOURCE_DIR) + "/drivers/sim/scenarios/" + name;
}

lphi::sim::Scenario load(const std::string& path) {
  auto loaded = lphi::sim::load_scenario_file(path);
  EXPECT_TRUE(loaded.scenario) << loaded.error;
  return loaded.scenario.value_or(lphi::sim::Scenario{});
}

using Dir = lphi::testing::TempDir;

lphi::testing::RunResult record(const std::vector<std::string>& args) {
  std::vector<std::string> all = {LPHI_SIM_PATH};
  all.insert(all.end(), args.begin(), args.end());
  return run_program(all, "", 120s);
}

// A relative comparison at the resolution of %.12g (5e-12 relative), with
// margin: 1e-11 relative, or 1e-11 of `scale` for values near zero.
void expect_printed(double printed, double exact, double scale, const char* what) {
  EXPECT_LE(std::abs(printed - exact), 1e-11 * std::max(std::abs(exact), scale))
      << what << ": printed " << printed << ", computed " << exact;
}

TEST(Recording, ServedInstrumentsAnswerWhatTheRecordingHolds) {
  // Serve saturation.toml at 200x and query each instrument at whatever
  // simulated time the replies carry; the recorder's reading at that time
  // (Recorder::at, the function every recorded row comes from) must be what
  // the instrument answered, to the 12 digits of a reply. A reply's time is
  // itself rounded to 12 digits (1e-10 s here): the model moves by far less
  // than a part in 1e11 in that time, and a noise-interval boundary (every
  // 0.1 s) falls inside it with probability ~1e-9 per reply.
  const std::string path = scenario_path("saturation.toml");
  lphi::testing::SimProcess served;
  ASSERT_TRUE(served.start(path, {"--speed", "200", "--duration-s", "2000"})) << served.stderr_text();
  lphi::sim::World world(load(path));
  const lphi::sim::SimInstrument lockin(lphi::sim::Instrument::lockin, world, 1.0);
  const lphi::sim::Recorder recorder(world, {}, lockin.range_v(), lockin.time_constant_s());
  lphi::testing::LineClient li, th, mg;
  ASSERT_TRUE(li.connect(served.port("lockin"), 5s));
  ASSERT_TRUE(th.connect(served.port("thermometer"), 5s));
  ASSERT_TRUE(mg.connect(served.port("magnet"), 5s));
  int compared = 0;
  for (int i = 0; i < 40; ++i) {
    const auto l = lphi::testing::fields(li.query("MEAS:ALL?", 5s).value_or(""));
    const auto t = lphi::testing::fields(th.query("MEAS:ALL?", 5s).value_or(""));
    const auto m = lphi::testing::fields(mg.query("MEAS:ALL?", 5s).value_or(""));
    ASSERT_EQ(l.size(), 4u);
    ASSERT_EQ(t.size(), 3u);
    ASSERT_EQ(m.size(), 5u);
    const auto at_l = recorder.at(l[0], false);
    ASSERT_TRUE(at_l.has_lockin);
    expect_printed(l[1], at_l.lockin.x_v, 0.0, "lock-in X");
    expect_printed(l[2], at_l.lockin.y_v, 0.0, "lock-in Y");
    EXPECT_EQ(l[3], at_l.lockin.overload ? 1.0 : 0.0);
    expect_printed(t[1], recorder.at(t[0], true).temperature_k, 0.0, "temperature");
    // The field is ~1e-6 T of noise at zero field: compare at 1e-11 of 1 mT.
    expect_printed(m[1], recorder.at(m[0], false).field_t, 1e-3, "field");
    ++compared;
    std::this_thread::sleep_for(20ms);
  }
  EXPECT_EQ(compared, 40);
  served.stop();

  // And the CSV of `lphi-sim --record` holds exactly Recorder::row(k): the
  // same function at t_k = k / rate (10 Hz here, the first 2000 s).
  Dir dir;
  const auto r = record({path, "--record", dir.file("rec.csv"), "--rate-hz", "10", "--duration-s", "2000"});
  ASSERT_EQ(r.exit_code, 0) << r.err;
  const auto rec = read_recording(dir.file("rec.csv"));
  ASSERT_TRUE(rec.error.empty()) << rec.error;
  EXPECT_EQ(rec.header, "time_s,temperature_k,field_t,lockin_x_v,lockin_y_v,lockin_overload");
  lphi::sim::RecordingOptions o;
  o.rate_hz = 10;
  o.duration_s = 2000;
  const lphi::sim::Recorder at10(world, o, lockin.range_v(), lockin.time_constant_s());
  ASSERT_EQ(static_cast<std::int64_t>(rec.rows.size()), at10.rows());
  ASSERT_EQ(rec.rows.size(), 20001u) << "rows at 0, 0.1, ..., 2000 s";
  for (std::size_t k = 0; k < rec.rows.size(); k += 7) {
    const auto want = at10.row(static_cast<std::int64_t>(k));
    const auto& got = rec.rows[k];
    expect_printed(got.t_s, 0.1 * static_cast<double>(k), 1.0, "time");
    ASSERT_TRUE(got.temperature_k && got.x_v && got.y_v && got.overload);
    expect_printed(*got.temperature_k, want.temperature_k, 0.0, "temperature");
    expect_printed(got.field_t, want.field_t, 1e-3, "field");
    expect_printed(*got.x_v, want.lockin.x_v, 0.0, "X");
    expect_printed(*got.y_v, want.lockin.y_v, 0.0, "Y");
  }
}

TEST(Recording, TruthFileIsTheServedRunsTruth) {
  // The same scenario served at 1e6x (the programme's 51 000 s in 0.05 s of
  // wall time) and recorded: the truth files hold the same records. The
  // served run writes them as its 2 ms ticks see stretches end, so only the
  // order may differ.
  const std::string path = scenario_path("saturation.toml");
  lphi::testing::SimProcess served;
  ASSERT_TRUE(served.start(path, {"--speed", "1e6"})) << served.stderr_text();
  ASSERT_EQ(served.wait(30s), 0) << served.stderr_text();
  Dir dir;
  const auto r = record({path, "--record", dir.file("rec.csv"), "--rate-hz", "0.1", "--truth",
                         dir.file("truth.jsonl")});
  ASSERT_EQ(r.exit_code, 0) << r.err;
  auto lines = [](const std::string& text) {
    std::multiset<std::string> out;
    std::stringstream s(text);
    std::string line;
    while (std::getline(s, line)) out.insert(line);
    return out;
  };
  const auto recorded = lines(slurp_file(dir.file("truth.jsonl")));
  EXPECT_EQ(recorded, lines(slurp_file(served.truth_path())));
  // 10 plateaus of 2 sweeps, and the scenario record.
  EXPECT_EQ(recorded.size(), 31u);
}

// saturation.toml without noise and without the lock-in's output filter.
std::string noise_free(const std::string& text) {
  std::string s = std::regex_replace(text, std::regex(R"(\n(lockin_x_v|lockin_y_v|temperature_rel|field_t) = [0-9.e+-]+)"),
                                     "\n$1 = 0.0");
  return std::regex_replace(s, std::regex(R"(\ntime_constant_s = [0-9.e+-]+)"), "\ntime_constant_s = 0.0");
}

TEST(Recording, NoiseFreeRowsFollowTheForwardModels) {
  // Every row of a noise-free, unfiltered recording, recomputed from the
  // scenario's parameters (read back from the truth file's scenario record)
  // with analysis/magnetoconductance.hpp's hln2d and the formulas of
  // drivers/sim/sample_model.hpp:
  //   L_phi = sqrt(D / (gamma0 + A T^p)),
  //   sigma = 1/R_D + e^2/(pi h) [kappa ln(T/T_ref) + hln2d(B) - hln2d(B_tr)],
  //   X = I N g / sigma,  Y = q X,
  // with e and h the exact SI 2019 values (BIPM SI brochure, 9th edition).
  // Tolerance 1e-10 relative: the row's B and T are printed to 12 digits and
  // X depends on them with a logarithmic derivative below 10.
  Dir dir;
  {
    std::ofstream out(dir.file("quiet.toml"));
    out << noise_free(slurp_file(scenario_path("saturation.toml")));
  }
  const auto r = record({dir.file("quiet.toml"), "--record", dir.file("rec.csv"), "--rate-hz", "0.5",
                         "--truth", dir.file("truth.jsonl")});
  ASSERT_EQ(r.exit_code, 0) << r.err;
  std::ifstream truth_in(dir.file("truth.jsonl"));
  std::string first;
  std::getline(truth_in, first);
  const auto head = nlohmann::json::parse(first);
  ASSERT_EQ(head["noise"]["lockin_x_v"], 0.0);
  ASSERT_EQ(head["lockin"]["time_constant_s"], 0.0);
  const auto& s = head["sample"];
  const auto& d = head["dephasing"];
  const auto& l = head["lockin"];
  const double e = 1.602176634e-19, h = 6.62607015e-34, pi = std::acos(-1.0);
  const double wl = e * e / (pi * h);
  const double b_tr = h / (2 * pi) / (2 * e * std::pow(double(s["mean_free_path_m"]), 2));
  const double kappa = 1.0 - 0.75 * double(s["interaction_f"]);
  const auto rec = read_recording(dir.file("rec.csv"));
  ASSERT_TRUE(rec.error.empty()) << rec.error;
  ASSERT_EQ(rec.rows.size(), 25501u) << "0.5 Hz over the programme's 51 000 s";
  for (const auto& row : rec.rows) {
    ASSERT_TRUE(row.temperature_k && row.x_v && row.y_v && row.overload);
    const double t = *row.temperature_k;
    const double lphi = std::sqrt(double(s["diffusion_m2s"]) /
                                  (double(d["gamma0_per_s"]) + double(d["a_per_s"]) * std::pow(t, double(d["p"]))));
    const double alpha = s["alpha"];
    const double sigma = 1.0 / double(s["rsq_ohm"]) +
                         wl * (kappa * std::log(t / double(s["reference_temperature_k"])) +
                               lphi::mc::hln2d(row.field_t, alpha, lphi) - lphi::mc::hln2d(b_tr, alpha, lphi));
    const double x = double(l["current_a"]) * double(s["squares"]) * double(l["gain"]) / sigma;
    EXPECT_NEAR(*row.x_v / x, 1.0, 1e-10) << "t = " << row.t_s;
    EXPECT_NEAR(*row.y_v / (double(l["quadrature_fraction"]) * x), 1.0, 1e-10);
    EXPECT_EQ(*row.overload, 0.0) << "X ~ 8 mV in the 10 mV range";
  }
  // The field and temperature columns are the programme: at each sweep's
  // ends the field is the truth's from_t and to_t, and during it the
  // temperature is the plateau's.
  std::string line;
  int sweeps = 0;
  while (std::getline(truth_in, line)) {
    const auto j = nlohmann::json::parse(line);
    if (j["record"] != "sweep") continue;
    ++sweeps;
    for (const auto& row : rec.rows) {
      if (std::abs(row.t_s - double(j["start_s"])) < 1e-9) {
        EXPECT_NEAR(row.field_t, double(j["from_t"]), 1e-12);
      }
      if (std::abs(row.t_s - double(j["end_s"])) < 1e-9) {
        EXPECT_NEAR(row.field_t, double(j["to_t"]), 1e-12);
      }
      if (row.t_s >= double(j["start_s"]) && row.t_s <= double(j["end_s"])) {
        EXPECT_NEAR(*row.temperature_k / double(j["temperature_k"]), 1.0, 1e-11);
      }
    }
  }
  EXPECT_EQ(sweeps, 20);
}

TEST(Recording, FaultsAndThermometerRate) {
  // faulty.toml at 1 Hz with a thermometer reading every 5th row: no lock-in
  // reading inside its two dropouts ([8000, 8600) and [30500, 30800) s), the
  // thermometer repeating its t = 20000 s reading over [20000, 21500), the
  // lowered range overloading over [12900, 13100), the pickup's Y/X = 0.3
  // over [17900, 18900), the heater glitch up to +10 mK at 23200 s (the peak
  // of sin^2 over [23050, 23350)). Expected values from the scenario file.
  Dir dir;
  const auto r = record({scenario_path("faulty.toml"), "--record", dir.file("rec.csv"), "--rate-hz", "1",
                         "--thermometer-every", "5"});
  ASSERT_EQ(r.exit_code, 0) << r.err;
  const auto rec = read_recording(dir.file("rec.csv"));
  ASSERT_TRUE(rec.error.empty()) << rec.error;
  ASSERT_EQ(rec.rows.size(), 56101u) << "1 Hz over the programme's 56 100 s";
  const double stuck = rec.rows[20000].temperature_k.value_or(-1);
  std::size_t without_lockin = 0, overloaded = 0;
  for (std::size_t k = 0; k < rec.rows.size(); ++k) {
    const auto& row = rec.rows[k];
    const double t = row.t_s;
    EXPECT_EQ(row.temperature_k.has_value(), k % 5 == 0) << "t = " << t;
    const bool dropout = (t >= 8000 && t < 8600) || (t >= 30500 && t < 30800);
    EXPECT_EQ(row.x_v.has_value(), !dropout) << "t = " << t;
    EXPECT_EQ(row.y_v.has_value(), !dropout);
    EXPECT_EQ(row.overload.has_value(), !dropout);
    without_lockin += dropout;
    if (t >= 20000 && t < 21500 && row.temperature_k) {
      EXPECT_EQ(*row.temperature_k, stuck) << "t = " << t;
    }
    if (!row.x_v) continue;
    const bool low_range = t >= 12900 && t < 13100;
    EXPECT_EQ(*row.overload, low_range ? 1.0 : 0.0) << "t = " << t;
    overloaded += *row.overload > 0;
    const double q = (t >= 17900 && t < 18900) ? 0.3 : 0.01;
    // Y noise is 2e-8 V rms on Y = q X, X ~ 8.5 mV: 2.4e-4 relative for
    // q = 0.01 and 7.8e-6 for q = 0.3; the tolerances are 6 of those.
    EXPECT_NEAR(*row.y_v / (q * *row.x_v), 1.0, q > 0.1 ? 5e-5 : 1.5e-3) << "t = " << t;
  }
  EXPECT_EQ(without_lockin, 900u);
  EXPECT_EQ(overloaded, 200u);
  // 0.1 K plus the glitch's 10 mK peak, with 0.2 % thermometer noise (6 sigma).
  EXPECT_NEAR(rec.rows[23200].temperature_k.value_or(0), 0.11, 0.11 * 0.012);
  EXPECT_NEAR(rec.rows[23400].temperature_k.value_or(0), 0.10, 0.10 * 0.012);
}

TEST(Recording, DeterministicForASeed) {
  // Same scenario and seed: the same bytes. Another seed: other noise of the
  // scenario's level. X1 - X2 is the difference of two independent Gaussian
  // draws of rms 2e-8 V (the model and filter are the same), so its rms is
  // sqrt(2) * 2e-8 V; over 51 001 rows the estimate's relative standard error
  // is 1/sqrt(2N) = 0.3 %, and 3 % is ten of those.
  Dir dir;
  const std::string path = scenario_path("saturation.toml");
  ASSERT_EQ(record({path, "--record", dir.file("a.csv"), "--rate-hz", "1"}).exit_code, 0);
  ASSERT_EQ(record({path, "--record", dir.file("b.csv"), "--rate-hz", "1"}).exit_code, 0);
  ASSERT_EQ(record({path, "--record", dir.file("c.csv"), "--rate-hz", "1", "--seed", "99"}).exit_code, 0);
  EXPECT_EQ(slurp_file(dir.file("a.csv")), slurp_file(dir.file("b.csv")));
  const auto a = read_recording(dir.file("a.csv"));
  const auto c = read_recording(dir.file("c.csv"));
  ASSERT_EQ(a.rows.size(), c.rows.size());
  double sum2 = 0;
  for (std::size_t k = 0; k < a.rows.size(); ++k) sum2 += std::pow(*a.rows[k].x_v - *c.rows[k].x_v, 2);
  const double rms = std::sqrt(sum2 / static_cast<double>(a.rows.size()));
  EXPECT_NEAR(rms / (std::sqrt(2.0) * 2e-8), 1.0, 0.03);
}

TEST(Recording, BadOptionsAreRefusedWithAReason) {
  Dir dir;
  const std::string path = scenario_path("saturation.toml");
  struct Case {
    std::vector<std::string> args;
    int exit_code;
    std::string says;
  };
  const std::vector<Case> cases = {
      {{path, "--record", dir.file("x.csv"), "--rate-hz", "0"}, 2, "--rate-hz"},
      {{path, "--record", dir.file("x.csv"), "--rate-hz", "-1"}, 2, "--rate-hz"},
      {{path, "--record", dir.file("x.csv"), "--rate-hz", "1e9"}, 2, "--rate-hz"},
      {{path, "--record", dir.file("x.csv"), "--rate-hz", "nan"}, 2, "--rate-hz"},
      {{path, "--record", dir.file("x.csv"), "--thermometer-every", "0"}, 2, "--thermometer-every"},
      {{path, "--record", dir.file("x.csv"), "--hold"}, 2, "--hold"},
      {{path, "--record", dir.file("x.csv"), "--duration-s", "-5"}, 2, "--duration-s"},
      {{path, "--rate-hz", "5"}, 2, "need --record"},
      {{path, "--record", dir.file("no/such/dir/x.csv")}, 1, "no/such/dir/x.csv"},
      {{dir.file("missing.toml"), "--record", dir.file("x.csv")}, 2, "missing.toml"},
  };
  for (const auto& c : cases) {
    const auto r = record(c.args);
    std::string joined;
    for (const auto& a : c.args) joined += a + " ";
    EXPECT_EQ(r.exit_code, c.exit_code) << joined << "\n" << r.err;
    EXPECT_NE(r.err.find(c.says), std::string::npos) << joined << "\n" << r.err;
  }
}

}  // namespace
