// The live-analysis commands of lphi against a real lphid (started in a
// temporary data directory by tests/support/daemon_process.hpp): a synthetic
// recorded cooldown (synthetic_recording.hpp) replayed with `lphi replay
// --fast`, then read back with sweeps, fits, verdict, alerts, ack and watch;
// the same recording replayed into a second fresh lphid gives the same
// fits and verdict. Without a daemon: the exit code for an unreachable one.
#include <gmock/gmock.h>
#include <gtest/gtest.h>

#include <array>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <fmt/format.h>
#include <fstream>
#include <future>
#include <nlohmann/json.hpp>
#include <set>
#include <sstream>
#include <string>
#include <thread>

#include "tests/support/run_program.hpp"
#include "tests/daemon/client/synthetic_recording.hpp"
#include "tests/support/daemon_process.hpp"

namespace {

using nlohmann::json;
using ::testing::HasSubstr;
using namespace std::chrono_literals;

const lphi::testing::RecordingPlan plan;

// Three sources, one sample described as the recording's truth; L_phi
// outside [10 nm, 200 nm] raises lphi-range (the truth at the coldest
// plateau, 180 mK: 150 nm * (0.18/0.5)^(-1/2) = 250 nm).
std::string config_text() {
  return lphi::testing::test_config("gain = 100.0\nplateau_min_duration_s = 30.0\n",
                                    "[alerts.lphi-range]\nmin_m = 10e-9\nmax_m = 200e-9\n");
}

lphi::testing::RunResult lphi_cli(std::vector<std::string> args, std::chrono::seconds limit = 120s) {
  args.insert(args.begin(), LPHI_CLI_PROGRAM);
  return lphi::testing::run_program(args, "", limit);
}

json parsed(const lphi::testing::RunResult& r) {
  json j = json::parse(r.out, nullptr, false);
  EXPECT_FALSE(j.is_discarded()) << r.out << r.err;
  return j;
}

std::string make_dir(const std::filesystem::path& path) {
  std::filesystem::create_directories(path);
  return path.string();
}

// A fresh lphid in its own directory.
struct Daemon {
  lphi::testing::TempDir dir;
  // lphid's output goes to files inside the data directory: it must exist.
  std::string data_dir = make_dir(dir.file("data"));
  lphi::testing::DaemonProcess process{data_dir, dir.write("lphid.toml", config_text())};
};

// Relative times of the recording start here (a fixed instant, so two
// replays give the same event times; an hour back, inside lphid's window).
const std::string start_unix = std::to_string(static_cast<long long>(
    std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count() - 3600.0));

std::string recording_file(const lphi::testing::TempDir& dir, std::size_t* rows = nullptr) {
  return dir.write("cooldown.csv", lphi::testing::make_recording_csv(plan, rows));
}

lphi::testing::RunResult replay(const Daemon& d, const std::string& csv) {
  return lphi_cli({"replay", csv, "--sample", "film-a", "--fast", "--start-unix", start_unix, "--data-dir",
                   d.data_dir, "--stall-s", "60"});
}

TEST(LiveCommands, UnreachableDaemonExitsThreeWithinTheTimeout) {
  lphi::testing::TempDir dir;  // no lphid has ever run here
  const auto started = std::chrono::steady_clock::now();
  for (const char* command : {"sweeps", "fits", "verdict", "alerts"}) {
    const auto r = lphi_cli({command, "--data-dir", dir.path(), "--timeout-s", "0.3"}, 20s);
    EXPECT_EQ(r.exit_code, 3) << command << ": " << r.err;
    EXPECT_THAT(r.err, HasSubstr("lphid does not answer"));
  }
  const auto w = lphi_cli({"watch", "--data-dir", dir.path(), "--connect-timeout-s", "0.3"}, 20s);
  EXPECT_EQ(w.exit_code, 3) << w.err;
  const auto a = lphi_cli({"ack", "1", "--data-dir", dir.path(), "--timeout-s", "0.3"}, 20s);
  EXPECT_EQ(a.exit_code, 3) << a.err;
  // Each waited about 0.3 s; 20 s for all six leaves room for a slow machine.
  EXPECT_LT(std::chrono::steady_clock::now() - started, 20s);
}

TEST(LiveCommands, BadInputIsRefusedBeforeAnythingIsSent) {
  Daemon d;
  ASSERT_TRUE(d.process.start());
  // Row 3 of the file (line 4) has a bad field cell: the whole file is
  // refused, the good rows before it are not sent either.
  const std::string bad = d.dir.write("bad.csv",
                                      "time_s,temperature_k,field_t,lockin_x_v,lockin_y_v\n"
                                      "0,0.5,0.0,5e-3,5e-5\n"
                                      "0.1,0.5,0.001,5e-3,5e-5\n"
                                      "0.2,0.5,1e2,5e-3,5e-5\n");
  const auto r = lphi_cli({"replay", bad, "--sample", "film-a", "--fast", "--data-dir", d.data_dir});
  EXPECT_EQ(r.exit_code, 2) << r.err;
  EXPECT_THAT(r.err, HasSubstr("bad.csv line 4, column 'field_t': 100 T is beyond the 30 T lphi accepts in "
                               "magnitude: is it in mT? 100 mT would be 0.1 T; map it with --column "
                               "field_t=field_t:mT"));
  const auto status = d.process.status(5000ms);
  ASSERT_TRUE(status.has_value());
  EXPECT_EQ(status->at("counters").value("accepted", -1), 0) << status->dump();

  // A sample lphid does not know: exit 4 (no such data), for replay and the queries.
  const auto good = recording_file(d.dir);
  const auto unknown = lphi_cli({"replay", good, "--sample", "film-b", "--fast", "--data-dir", d.data_dir});
  EXPECT_EQ(unknown.exit_code, 4) << unknown.err;
  EXPECT_THAT(unknown.err, HasSubstr("no sample named \"film-b\""));
  for (const char* command : {"sweeps", "fits", "verdict", "alerts"}) {
    const auto q = lphi_cli({command, "--sample", "film-b", "--data-dir", d.data_dir});
    EXPECT_EQ(q.exit_code, 4) << command << ": " << q.err;
    EXPECT_THAT(q.err, HasSubstr("film-b")) << command;
  }
  // Nothing replayed yet: no sweeps (exit 4), a verdict without data (exit 0).
  const auto none = lphi_cli({"sweeps", "--json", "--data-dir", d.data_dir});
  EXPECT_EQ(none.exit_code, 4);
  EXPECT_EQ(parsed(none), json::array());
  const auto verdict = lphi_cli({"verdict", "--json", "--data-dir", d.data_dir});
  EXPECT_EQ(verdict.exit_code, 0) << verdict.err;
  EXPECT_EQ(parsed(verdict).at(0).value("state", ""), "insufficient-data");
  // Bad options: exit 2.
  EXPECT_EQ(lphi_cli({"watch", "--topics", "fits", "--data-dir", d.data_dir}).exit_code, 2);
  EXPECT_EQ(lphi_cli({"replay", good, "--sample", "film-a", "--fast", "--speed", "2", "--data-dir", d.data_dir})
                .exit_code,
            2);
  EXPECT_EQ(lphi_cli({"replay", good, "--sample", "film-a", "--column", "volts=v", "--data-dir", d.data_dir})
                .exit_code,
            2);
  const auto ack = lphi_cli({"ack", "999", "--data-dir", d.data_dir});
  EXPECT_NE(ack.exit_code, 0);
  EXPECT_THAT(ack.err, HasSubstr("999"));
}

TEST(LiveCommands, ReplayThenReadBackEveryView) {
  Daemon d;
  ASSERT_TRUE(d.process.start());
  std::size_t rows = 0;
  const auto csv = recording_file(d.dir, &rows);

  // A watcher, subscribed before the replay: it must see fits and sweeps. A
  // SUB socket misses what is published before it joins, so the replay starts
  // once the watcher says it has joined (bounded wait, not a fixed pause).
  lphi::testing::ChildProcess watcher;
  lphi::testing::Launch watch;
  watch.args = {LPHI_CLI_PROGRAM, "watch", "--json", "--count", "4", "--topics", "fit,sweep", "--timeout-s",
                "100", "--data-dir", d.data_dir};
  ASSERT_TRUE(watcher.start(watch));
  const auto joined_by = std::chrono::steady_clock::now() + 30s;
  while (watcher.stderr_text().find("watching lphid's events") == std::string::npos) {
    ASSERT_LT(std::chrono::steady_clock::now(), joined_by) << "lphi watch never joined: " << watcher.stderr_text();
    ASSERT_TRUE(watcher.running()) << watcher.stderr_text();
    std::this_thread::sleep_for(10ms);  // polling a file for a condition
  }

  const auto r = replay(d, csv);
  ASSERT_EQ(r.exit_code, 0) << r.out << r.err;
  EXPECT_THAT(r.out, HasSubstr("replayed " + std::to_string(rows) + " of " + std::to_string(rows) + " rows"));
  EXPECT_THAT(r.out, HasSubstr("lphid has analysed it"));

  // Sweeps: two per plateau, at the plateau's temperature.
  const auto sweeps_run = lphi_cli({"sweeps", "--json", "--data-dir", d.data_dir});
  ASSERT_EQ(sweeps_run.exit_code, 0) << sweeps_run.err;
  const json sweeps = parsed(sweeps_run);
  ASSERT_EQ(sweeps.size(), 2 * plan.plateaus_k.size()) << sweeps.dump(1);
  for (std::size_t i = 0; i < sweeps.size(); ++i) {
    for (const char* key : {"sweep_id", "sample", "index", "direction", "t_start", "t_end", "field_min_t",
                            "field_max_t", "n_points", "temperature_k", "temperature_spread_k",
                            "temperature_unstable", "truncated", "n_overload", "fitted"}) {
      EXPECT_TRUE(sweeps[i].contains(key)) << key;
    }
    // The recording's thermometer cells are written with 6 significant digits.
    EXPECT_NEAR(sweeps[i].value("temperature_k", 0.0), plan.plateaus_k[i / 2], 1e-6);
  }

  // Fits: L_phi at each plateau within 4 of its standard errors of the
  // truth the recording was made from (synthetic.hpp's forward model; the
  // noise is seeded, so this is not a matter of luck: at 4 sigma a correct
  // fit of Gaussian noise fails with odds below 1e-4 per sweep).
  const auto fits_run = lphi_cli({"fits", "--json", "--data-dir", d.data_dir});
  ASSERT_EQ(fits_run.exit_code, 0) << fits_run.err;
  const json fits = parsed(fits_run);
  ASSERT_EQ(fits.size(), sweeps.size()) << fits.dump(1);
  for (const auto& f : fits) {
    for (const char* key : {"model", "lphi_m", "lphi_err_m", "alpha", "alpha_err", "chi2_red", "n_points",
                            "field_window_t", "converged", "flags", "sweep_id", "sample", "temperature_k",
                            "temperature_spread_k", "t_start", "t_end"}) {
      EXPECT_TRUE(f.contains(key)) << key;
    }
    ASSERT_TRUE(f.value("ok", false)) << f.dump();
    const double truth = lphi::testing::truth_lphi_m(plan, f.value("temperature_k", 0.0));
    const double lphi = f.value("lphi_m", 0.0), err = f.value("lphi_err_m", 0.0);
    EXPECT_GT(err, 0.0);
    EXPECT_NEAR(lphi, truth, 4.0 * err) << f.dump();
  }

  // Verdict: the keys of `lphi dephasing --json` plus the live ones.
  const auto verdict_run = lphi_cli({"verdict", "--json", "--data-dir", d.data_dir});
  ASSERT_EQ(verdict_run.exit_code, 0) << verdict_run.err;
  const json verdict = parsed(verdict_run);
  ASSERT_EQ(verdict.size(), 1u);
  for (const char* key : {"state", "exponent_p", "exponent_p_err", "lphi_sat_m", "t_sat_k", "n_points", "sample",
                          "electrons_cooling", "likely_cause", "regime", "aak_ratio", "updated_at"}) {
    EXPECT_TRUE(verdict[0].contains(key)) << key;
  }
  EXPECT_EQ(verdict[0].value("sample", ""), "film-a");

  // The human tables name the sample and use readable units.
  const auto table = lphi_cli({"fits", "--data-dir", d.data_dir});
  EXPECT_EQ(table.exit_code, 0);
  EXPECT_THAT(table.out, HasSubstr("180 mK"));
  EXPECT_THAT(table.out, HasSubstr(" nm"));

  // lphi-range: the coldest plateau's 250 nm lies above max_m = 200 nm.
  const auto alerts_run = lphi_cli({"alerts", "--json", "--data-dir", d.data_dir});
  ASSERT_EQ(alerts_run.exit_code, 0) << alerts_run.err;
  const json alerts = parsed(alerts_run);
  std::int64_t id = 0;
  for (const auto& a : alerts) {
    for (const char* key : {"id", "rule", "severity", "state", "raised_at", "acked_at", "cleared_at", "message"}) {
      EXPECT_TRUE(a.contains(key)) << key;
    }
    if (a.value("rule", "") == "lphi-range") id = a.value("id", std::int64_t{0});
  }
  ASSERT_GT(id, 0) << alerts.dump(1);
  const auto ack = lphi_cli({"ack", std::to_string(id), "--data-dir", d.data_dir});
  EXPECT_EQ(ack.exit_code, 0) << ack.err;
  const json after = parsed(lphi_cli({"alerts", "--json", "--data-dir", d.data_dir}));
  bool acknowledged = false;
  for (const auto& a : after) {
    if (a.value("id", std::int64_t{0}) == id) acknowledged = a.value("state", "") == "acknowledged";
  }
  EXPECT_TRUE(acknowledged) << after.dump(1);

  lphi::testing::ProgramResult watched;
  watched.exit_code = watcher.wait(120s);
  watched.out = watcher.stdout_text();
  watched.err = watcher.stderr_text();
  EXPECT_EQ(watched.exit_code, 0) << watched.err;
  std::size_t lines = 0;
  for (std::size_t from = 0; from < watched.out.size();) {
    const auto end = watched.out.find('\n', from);
    const json event = json::parse(watched.out.substr(from, end - from), nullptr, false);
    EXPECT_TRUE(event.is_object()) << watched.out;
    EXPECT_EQ(event.value("sample", ""), "film-a");
    ++lines;
    from = end == std::string::npos ? watched.out.size() : end + 1;
  }
  EXPECT_EQ(lines, 4u) << watched.out;
}

TEST(LiveCommands, ReplayIsDeterministicAcrossFreshDaemons) {
  std::array<json, 2> fits, verdicts, sweeps;
  lphi::testing::TempDir files;
  const auto csv = recording_file(files);
  for (int run = 0; run < 2; ++run) {
    Daemon d;
    ASSERT_TRUE(d.process.start());
    const auto r = replay(d, csv);
    ASSERT_EQ(r.exit_code, 0) << r.out << r.err;
    fits[run] = parsed(lphi_cli({"fits", "--json", "--data-dir", d.data_dir}));
    verdicts[run] = parsed(lphi_cli({"verdict", "--json", "--data-dir", d.data_dir}));
    sweeps[run] = parsed(lphi_cli({"sweeps", "--json", "--data-dir", d.data_dir}));
    EXPECT_EQ(d.process.stop(), 0);
  }
  ASSERT_FALSE(fits[0].empty());
  EXPECT_EQ(fits[0], fits[1]);
  EXPECT_EQ(verdicts[0], verdicts[1]);
  EXPECT_EQ(sweeps[0], sweeps[1]);
}

// The recording written in lab units under other names (ms, mK, mT, mV;
// SI Brochure, 9th ed., table 7), replayed with --column mappings, gives the
// fits of the SI recording: the values differ by a rounding of the last bit
// (printed with 17 digits, scaled back by a power of ten), so the fitted
// L_phi agree to 1e-9 relative, far inside their errors.
TEST(LiveCommands, ReplayOfARecordingInLabUnitsWithColumnMappingsGivesTheSiFits) {
  lphi::testing::TempDir files;
  const auto si_csv = recording_file(files);
  std::string lab = "t_ms,T_mK,B_mT,X_mV,Y_mV,tc_ms\n";
  {
    std::istringstream in(lphi::testing::make_recording_csv(plan));
    std::string line;
    std::getline(in, line);
    ASSERT_EQ(line, "time_s,temperature_k,field_t,lockin_x_v,lockin_y_v,lockin_time_constant_s");
    std::ostringstream out;
    out.precision(17);
    while (std::getline(in, line)) {
      std::istringstream cells(line);
      std::string cell;
      for (int c = 0; std::getline(cells, cell, ','); ++c) {
        out << (c == 0 ? "" : ",");
        if (!cell.empty()) out << std::stod(cell) * 1e3;
      }
      out << "\n";
    }
    lab += out.str();
  }
  const auto lab_csv = files.write("lab.csv", lab);
  std::array<json, 2> fits;
  for (int run = 0; run < 2; ++run) {
    Daemon d;
    ASSERT_TRUE(d.process.start());
    std::vector<std::string> args = {"replay", run == 0 ? si_csv : lab_csv, "--sample", "film-a", "--fast",
                                     "--start-unix", start_unix, "--data-dir", d.data_dir, "--stall-s", "60"};
    if (run == 1) {
      for (const char* m : {"time_s=t_ms:ms", "temperature_k=T_mK:mK", "field_t=B_mT:mT", "lockin_x_v=X_mV:mV",
                            "lockin_y_v=Y_mV:mV", "lockin_time_constant_s=tc_ms:ms"}) {
        args.insert(args.end(), {"--column", m});
      }
    }
    const auto r = lphi_cli(args);
    ASSERT_EQ(r.exit_code, 0) << r.out << r.err;
    fits[run] = parsed(lphi_cli({"fits", "--json", "--data-dir", d.data_dir}));
    EXPECT_EQ(d.process.stop(), 0);
  }
  ASSERT_TRUE(fits[0].is_array());
  ASSERT_FALSE(fits[0].empty());
  ASSERT_EQ(fits[0].size(), fits[1].size()) << fits[1].dump();
  for (std::size_t k = 0; k < fits[0].size(); ++k) {
    const auto& a = fits[0][k];
    const auto& b = fits[1][k];
    ASSERT_TRUE(a.contains("lphi_m") && b.contains("lphi_m")) << a.dump();
    if (!a["lphi_m"].is_number()) {
      EXPECT_EQ(a["lphi_m"], b["lphi_m"]);
      continue;
    }
    EXPECT_NEAR(b["lphi_m"].get<double>(), a["lphi_m"].get<double>(), 1e-9 * a["lphi_m"].get<double>()) << k;
  }
}

}  // namespace

namespace {

// A cooldown whose magnet never passes through zero field: it ramps between
// +20 and +60 mT (a field offset left set by hand, say). No run is a sweep;
// the replay must say so and exit 5, and `lphi status` must show the runs
// dropped for it and the same reason.
TEST(LiveCommands, AReplayWithoutSweepsExitsFiveAndSaysWhy) {
  Daemon d;
  ASSERT_TRUE(d.process.start());
  std::string csv = "time_s,temperature_k,field_t,lockin_x_v,lockin_y_v\n";
  for (int i = 0; i < 4000; ++i) {
    const double t = 0.1 * i;
    const double u = std::fmod(t, 80.0) / 40.0;  // a triangle of period 80 s
    const double field = 0.02 + 0.04 * (u < 1.0 ? u : 2.0 - u);
    csv += fmt::format("{:.1f},0.1,{:.9g},5e-3,5e-5\n", t, field);
  }
  const auto r = replay(d, d.dir.write("offset.csv", csv));
  EXPECT_EQ(r.exit_code, 5) << r.out << r.err;
  EXPECT_THAT(r.err, HasSubstr("no sweeps for film-a: the field never passed through zero"));
  EXPECT_THAT(r.err, HasSubstr("between 20 mT and 60 mT"));

  const auto status = lphi_cli({"status", "--json", "--data-dir", d.data_dir});
  ASSERT_EQ(status.exit_code, 0) << status.err;
  const json s = parsed(status);
  ASSERT_EQ(s.at("samples").size(), 1u) << s.dump();
  const json& sample = s.at("samples").at(0);
  EXPECT_EQ(sample.value("sample", ""), "film-a");
  EXPECT_EQ(sample.value("sweeps", -1), 0);
  EXPECT_EQ(sample.value("lockin_readings", 0), 4000);
  // Ten ramps of 40 s closed by their reversal (the last one is still
  // open): each counted as a run off zero.
  EXPECT_EQ(sample.at("dropped").at("segmenter").value("runs_off_zero", 0), 9) << sample.dump();
  EXPECT_GT(sample.at("dropped").at("segmenter").value("settling_field_reversal", 0), 0);
  EXPECT_THAT(sample.value("no_sweeps_reason", ""), HasSubstr("never passed through zero"));
  // The field was read with every lock-in reading (0.1 s apart; Unix times
  // near 1.8e9 s are doubles 2.4e-7 s apart): the automatic age limit is
  // its floor, 2 s.
  EXPECT_NEAR(sample.at("field").value("median_interval_s", 0.0), 0.1, 1e-6);
  EXPECT_DOUBLE_EQ(sample.at("field").value("age_limit_s", 0.0), 2.0);
  const auto human = lphi_cli({"status", "--data-dir", d.data_dir});
  EXPECT_THAT(human.out, HasSubstr("sample film-a: 4000 lock-in readings"));
  EXPECT_THAT(human.out, HasSubstr("runs_off_zero=9"));
  EXPECT_THAT(human.out, HasSubstr("no sweeps: the field never passed through zero"));
  // lphid logged the reason's counter when it first became non-zero (its
  // log is flushed when it stops).
  EXPECT_EQ(d.process.stop(), 0);
  std::string log;
  for (const auto& entry : std::filesystem::directory_iterator(d.data_dir)) {
    if (entry.path().extension() == ".log" || entry.path().filename() == "lphid.stderr" ||
        entry.path().filename() == "lphid.stdout") {
      std::ifstream in(entry.path());
      for (std::string line; std::getline(in, line);) log += line + "\n";
    }
  }
  EXPECT_THAT(log, HasSubstr("sample film-a: dropping readings or runs: segmenter.runs_off_zero"));
}

}  // namespace
