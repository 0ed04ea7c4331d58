// The alert rules that need a whole scenario to be raised and cleared, each
// through a real lphid fed by `lphi replay` and read back with `lphi alerts
// --all --json`:
//   fit-failed: open_contact.toml, a current contact open for one sweep
//     (drivers/sim/scenarios/open_contact.toml);
//   writer-lag: a burst of readings stored faster than they arrive, judged
//     on lphid's 1 s health tick;
//   verdict-saturated and electrons-not-cooling: thermal_cycle.toml, two
//     cooldowns, the first with hot electrons, the second without.
#include <gtest/gtest.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <future>
#include <nlohmann/json.hpp>
#include <string>
#include <thread>
#include <vector>

#include "tests/scenarios/live_run.hpp"
#include "tests/scenarios/recording_csv.hpp"

// A named namespace: the scenario tests are compiled as one unity source,
// and these helpers hide the ones of the same names in alerts_test.cpp.
namespace lphi::testing::lifecycle {
namespace {

using lphi::testing::alerts_of;
using lphi::testing::LiveRun;
using nlohmann::json;

// Unix time of the recordings' relative time 0, so that event times in the
// alerts can be compared with the scenario's programme.
constexpr double kEpoch = 1.7e9;

std::string describe(const std::vector<json>& alerts) {
  std::string s;
  for (const auto& a : alerts) s += a.dump() + "\n";
  return s.empty() ? "(none)" : s;
}

double number(const json& j, const char* key) {
  return j.contains(key) && j[key].is_number() ? j[key].get<double>() : -1.0;
}

bool cleared(const json& a) {
  return a.value("state", "") == "cleared" && a.contains("cleared_at") && a["cleared_at"].is_number() &&
         a.contains("raised_at") && a["raised_at"].is_number();
}

// The two faults behind these scenarios as lphi-sim records them. An open
// contact leaves the lock-in its noise floor: |X| within 50 of its 20 nV
// rms, both signs about equally often (binomial: 480 +- 16 of 959 rows
// negative; [400, 560] is 5 of those), where X is 7.5 mV with the contact
// made. The thermal cycle's
// heating (floor 60 mK) lasts until the warm-up ends at 40 800 s: the truth
// records the first cooldown's sweeps heated and the second's not, with the
// electrons at the bath temperature.
TEST(ScenarioAlertLifecycle, TheFaultsAsRecorded) {
  LiveRun run;
  ASSERT_TRUE(run.record("open_contact.toml", 1.0)) << run.error();
  const auto rec = lphi::testing::read_recording(run.csv_path());
  ASSERT_EQ(rec.error, "");
  std::size_t open = 0, negative = 0, made = 0;
  for (const auto& row : rec.rows) {
    ASSERT_TRUE(row.x_v.has_value());
    // From 3621 s: the reading at 3620 s is the output filter's average
    // over the 30 ms time constant before it, when the contact was made.
    if (row.t_s > 3620.0 && row.t_s < 4580.0) {
      ++open;
      EXPECT_LT(std::abs(*row.x_v), 1e-6) << row.t_s;
      if (*row.x_v < 0.0) ++negative;
    } else if (row.t_s >= 2600.0 && row.t_s < 3600.0) {
      ++made;
      EXPECT_GT(*row.x_v, 5e-3) << row.t_s;
    }
  }
  EXPECT_EQ(open, 959u);
  EXPECT_EQ(made, 1000u);
  EXPECT_GT(negative, 400u);
  EXPECT_LT(negative, 560u);

  ASSERT_TRUE(run.record("thermal_cycle.toml", 1.0)) << run.error();
  const auto sweeps = run.truth("sweep");
  ASSERT_EQ(sweeps.size(), 24u);
  for (const auto& s : sweeps) {
    const bool first = s.value("start_s", 0.0) < 40800.0;
    EXPECT_EQ(s.value("heating", !first), first) << s.dump();
    if (first) {
      EXPECT_GT(s.value("electron_temperature_k", 0.0), s.value("temperature_k", 1.0)) << s.dump();
    } else {
      EXPECT_EQ(s.value("electron_temperature_k", 0.0), s.value("temperature_k", -1.0)) << s.dump();
    }
  }
}

// open_contact.toml: sweep 1 (the second at 1 K) is measured with no current
// through the sample, the lock-in reading its noise floor of both signs, so
// the sweep cannot even be prepared (a sheet resistance that is not a
// positive number). Its fit is
// stored as failed with that reason and raises fit-failed; with clear_after
// = 3 the third good fit after it (sweep 4) clears it.
TEST(ScenarioAlertLifecycle, AnOpenContactFailsTheFitAndTheGoodSweepsClearIt) {
  LiveRun run;
  ASSERT_TRUE(run.record("open_contact.toml", 1.0)) << run.error();
  run.write_config("film", "", "", "[alerts.fit-failed]\nclear_after = 3\n");
  ASSERT_TRUE(run.start_daemon()) << run.error();
  const auto r = run.replay(run.csv_path(), "film", kEpoch);
  ASSERT_EQ(r.exit_code, 0) << r.out << r.err << run.daemon_log();
  const auto all = run.query("alerts", "", {"--all"});
  const auto fits = run.query("fits", "film");
  const auto sweeps = run.query("sweeps", "film");
  ASSERT_TRUE(all && fits && sweeps) << run.error();
  // Six sweeps (two per plateau, drivers/sim/scenarios/open_contact.toml),
  // each with its stored fit: only sweep 1's failed.
  ASSERT_EQ(sweeps->size(), 6u) << sweeps->dump(1);
  ASSERT_EQ(fits->size(), 6u) << fits->dump(1);
  for (const auto& f : *fits) {
    const bool open = f.value("sweep_index", -1) == 1;
    EXPECT_EQ(f.value("ok", open), !open) << f.dump();
    EXPECT_EQ(f.value("used_in_dephasing", open), !open) << f.dump();
    if (open) {
      EXPECT_NE(f.value("error", "").find("not a positive number"), std::string::npos) << f.dump();
    }
  }
  const auto failed = alerts_of(*all, "fit-failed");
  ASSERT_EQ(failed.size(), 1u) << describe(failed);
  const json& a = failed[0];
  EXPECT_TRUE(cleared(a)) << a.dump(1);
  // Raised at the end of sweep 1 and cleared at the end of sweep 4, in the
  // readings' own time (the sweep ends come from `lphi sweeps`).
  auto t_end = [&](int index) {
    for (const auto& s : *sweeps)
      if (s.value("index", -1) == index) return number(s, "t_end");
    return -1.0;
  };
  EXPECT_EQ(number(a, "raised_at"), t_end(1)) << a.dump(1);
  EXPECT_EQ(number(a, "cleared_at"), t_end(4)) << a.dump(1);
  // The message names the sweep as `lphi sweeps` lists it (index 1; its row
  // id is 2) and says why the fit failed.
  const std::string message = a.value("message", "");
  EXPECT_NE(message.find("the fit of sweep 1 failed"), std::string::npos) << message;
  EXPECT_NE(message.find("not a positive number"), std::string::npos) << message;
  EXPECT_EQ(a["context"].value("sweep_index", -1), 1) << a.dump(1);
  EXPECT_EQ(a["context"].value("sweep_id", -1), 2) << a.dump(1);
  // Only the failed sweep's fit was bad: no other fit-quality alert is raised.
  EXPECT_TRUE(alerts_of(*all, "fit-chi2").empty()) << describe(alerts_of(*all, "fit-chi2"));
}

// writer-lag is judged on lphid's 1 s health tick against the age of the
// oldest job waiting for the store writer. A --fast replay of 255 000 rows
// (765 000 readings, a few seconds) keeps about 50 000 readings in flight
// (three senders of 8 batches of 2000): the writer stays 0.01-0.3 s behind on
// this kind of machine (measured). With max_lag_s = 0.02 s the rule is raised
// while the burst is stored; once lphid is idle nothing waits and three
// ticks (clear_after) clear it.
TEST(ScenarioAlertLifecycle, WriterLagIsRaisedDuringABurstAndClearedWhenIdle) {
  LiveRun run;
  ASSERT_TRUE(run.record("saturation.toml", 5.0)) << run.error();
  const double max_lag_s = 0.02;
  run.write_config("film", "", "", "[alerts.writer-lag]\nmax_lag_s = 0.02\n");
  ASSERT_TRUE(run.start_daemon()) << run.error();
  const auto r = run.replay(run.csv_path(), "film", kEpoch);
  ASSERT_EQ(r.exit_code, 0) << r.out << r.err << run.daemon_log();
  std::vector<json> lag;
  for (int i = 0; i < 100; ++i) {  // 10 s at most
    if (const auto all = run.query("alerts", "", {"--all"})) {
      lag = alerts_of(*all, "writer-lag");
      if (!lag.empty() && std::all_of(lag.begin(), lag.end(), cleared)) break;
    }
    std::this_thread::sleep_for(std::chrono::milliseconds(100));
  }
  ASSERT_FALSE(lag.empty()) << "not raised during the burst\n" << run.daemon_log();
  for (const auto& a : lag) {
    EXPECT_TRUE(cleared(a)) << a.dump(1);
    EXPECT_EQ(a.value("subject", "x"), "");
    // What raised it was a lag above the limit: the alert's value and the
    // lag stored in its context (what the health tick saw).
    EXPECT_GT(number(a, "value"), max_lag_s) << a.dump(1);
    ASSERT_TRUE(a.contains("context")) << a.dump(1);
    EXPECT_GT(number(a["context"], "writer_lag_s"), max_lag_s) << a.dump(1);
    EXPECT_EQ(number(a["context"], "max_lag_s"), max_lag_s) << a.dump(1);
    EXPECT_GT(number(a, "cleared_at"), number(a, "raised_at")) << a.dump(1);
  }
  // Idle now: the writer is not behind.
  const auto status = run.lphi({"status", "--json"});
  const auto j = json::parse(status.out, nullptr, false);
  ASSERT_TRUE(j.is_object() && j.contains("writer")) << status.out << status.err;
  EXPECT_LE(number(j["writer"], "lag_s"), max_lag_s) << j["writer"].dump();
}

// thermal_cycle.toml: two cooldowns of the film of heating.toml, warmed to
// 10 K between them, with new_cooldown_above_k = 4 K. The first cooldown's
// electrons stop cooling near 60 mK: its verdict is saturated with
// electrons_cooling false (electron-heating-or-noise), raising
// verdict-saturated and electrons-not-cooling. The second cooldown, without
// the heating, starts a fresh L_phi(T): its first verdicts (insufficient
// data, then a power law) clear verdict-saturated, and once sigma(0) follows
// ln T over enough plateaus electrons_cooling = true clears
// electrons-not-cooling. Times in the programme: the first cooldown's sweeps
// end by 30 100 s, the second's start at 43 400 s.
TEST(ScenarioAlertLifecycle, AThermalCycleStartsANewCooldownThatClearsTheVerdictAlerts) {
  LiveRun run;
  ASSERT_TRUE(run.record("thermal_cycle.toml", 1.0)) << run.error();
  run.write_config("film", "", "new_cooldown_above_k = 4.0\n");
  ASSERT_TRUE(run.start_daemon()) << run.error();
  const auto r = run.replay(run.csv_path(), "film", kEpoch);
  ASSERT_EQ(r.exit_code, 0) << r.out << r.err << run.daemon_log();
  const auto all = run.query("alerts", "", {"--all"});
  const auto v = run.verdict("film");
  const auto sweeps = run.query("sweeps", "film");
  const auto fits = run.query("fits", "film");
  ASSERT_TRUE(all && v && sweeps && fits) << run.error();

  // 12 sweeps per cooldown (six plateaus, two sweeps each), each numbered.
  ASSERT_EQ(sweeps->size(), 24u) << sweeps->dump(1);
  for (const auto& s : *sweeps) {
    const double start = number(s, "t_start") - kEpoch;
    EXPECT_EQ(s.value("cooldown", 0), start < 35000.0 ? 1 : 2) << s.dump();
  }
  for (const auto& f : *fits)
    EXPECT_EQ(f.value("cooldown", 0), f.value("sweep_index", 0) < 12 ? 1 : 2) << f.dump();

  const double second_start = 43400.0, first_end = 30100.0;
  for (const char* rule : {"verdict-saturated", "electrons-not-cooling"}) {
    const auto a = alerts_of(*all, rule);
    ASSERT_EQ(a.size(), 1u) << rule << "\n" << describe(alerts_of(*all, rule)) << all->dump(1);
    EXPECT_TRUE(cleared(a[0])) << a[0].dump(1);
    EXPECT_LE(number(a[0], "raised_at") - kEpoch, first_end) << a[0].dump(1);
    EXPECT_GT(number(a[0], "cleared_at") - kEpoch, second_start) << a[0].dump(1);
    EXPECT_EQ(a[0]["context"].value("cooldown", 0), 1) << a[0].dump(1);
    EXPECT_NE(a[0].value("message", "").find("cooldown 1"), std::string::npos) << a[0].dump(1);
  }
  EXPECT_EQ(alerts_of(*all, "electrons-not-cooling")[0].value("severity", ""), "critical");
  EXPECT_EQ(alerts_of(*all, "verdict-saturated")[0]["context"].value("likely_cause", ""),
            "electron-heating-or-noise");

  // The verdict is the second cooldown's alone: its 12 sweeps, a power law
  // with the truth's p = 1 (within 3 of its errors and 5 %), electrons cooling.
  EXPECT_EQ(v->value("cooldown", 0), 2) << v->dump(1);
  EXPECT_EQ(v->value("electrons_cooling", false), true) << v->dump(1);
  EXPECT_EQ(v->value("state", ""), "power-law") << v->dump(1);
  EXPECT_EQ(v->value("n_points", 0), 12) << v->dump(1);
  const double p = number(*v, "exponent_p"), p_err = number(*v, "exponent_p_err");
  EXPECT_NEAR(p, 1.0, 3.0 * p_err + 1e-12) << v->dump(1);
  EXPECT_NEAR(p, 1.0, 0.05) << v->dump(1);
  // The human tables show the cooldown too.
  const auto table = run.lphi({"verdict", "--sample", "film"});
  EXPECT_NE(table.out.find("cooldown"), std::string::npos) << table.out;
}

}  // namespace
}  // namespace lphi::testing::lifecycle
