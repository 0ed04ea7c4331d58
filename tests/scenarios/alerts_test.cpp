// Alert rules raised and cleared by scenarios replayed into a real lphid,
// read back with `lphi alerts --all --json`. faulty.toml puts one thing
// wrong into one sweep and puts it right before the next (drivers/sim/
// scenarios/faulty.toml): the lock-in's range too low for 200 s (overload),
// a capacitive pickup for a whole sweep (Y/X = 0.3), a heater glitch of
// 10 mK inside a sweep at 0.1 K (temperature unstable). It ends with a
// warm-up to 1 K, which clears what only the cold raised. The [alerts]
// thresholds below are narrowed so that this film crosses them:
//   lphi-range min 0.25 um: L_phi is 0.218 um at 1 K, 0.30 um at 0.5 K, and
//     0.218 um again after the warm-up (raised, cleared, raised again);
//   excitation-heating max 5: e V / k_B T = e I R N / k_B T is about
//     0.97 K / T here (X/g = 85 uV), above 5 from 0.1 K down, ~1 at 1 K.
#include <gtest/gtest.h>

#include <algorithm>
#include <chrono>
#include <fstream>
#include <map>
#include <nlohmann/json.hpp>
#include <string>
#include <thread>
#include <vector>

#include "tests/scenarios/live_run.hpp"

namespace {

using lphi::testing::alerts_of;
using lphi::testing::LiveRun;
using nlohmann::json;

bool raised_and_cleared(const std::vector<json>& alerts) {
  return std::any_of(alerts.begin(), alerts.end(), [](const json& a) {
    return a.value("state", "") == "cleared" && a.contains("cleared_at") && !a["cleared_at"].is_null() &&
           a.contains("raised_at") && !a["raised_at"].is_null();
  });
}

std::string describe(const std::vector<json>& alerts) {
  std::string s;
  for (const auto& a : alerts) s += a.dump() + "\n";
  return s.empty() ? "(none)" : s;
}

TEST(ScenarioAlerts, FaultyInstrumentsRaiseAndClearTheirAlerts) {
  LiveRun run;
  ASSERT_TRUE(run.record("faulty.toml", 1.0)) << run.error();
  run.write_config("film", "", "",
                   "[alerts.lphi-range]\nmin_m = 0.25e-6\nmax_m = 100e-6\n"
                   "[alerts.excitation-heating]\nmax_ratio = 5.0\n");
  ASSERT_TRUE(run.start_daemon()) << run.error();
  const auto r = run.replay(run.csv_path(), "film");
  ASSERT_EQ(r.exit_code, 0) << r.out << r.err << run.daemon_log();
  const auto all = run.query("alerts", "", {"--all"});
  ASSERT_TRUE(all && all->is_array()) << run.error();

  for (const char* rule : {"lockin-overload", "quadrature", "temperature-unstable", "lphi-range",
                           "excitation-heating"}) {
    const auto a = alerts_of(*all, rule);
    EXPECT_TRUE(raised_and_cleared(a)) << rule << " was not raised and cleared:\n" << describe(a);
  }
  // Each fault lasted one sweep: one alert each, not one per reading (the
  // lifecycle's hysteresis).
  for (const char* rule : {"lockin-overload", "quadrature"})
    EXPECT_EQ(alerts_of(*all, rule).size(), 1u) << rule << ":\n" << describe(alerts_of(*all, rule));
  // The glitch's alert is the sweep at 0.1 K's (its context names the
  // sweep's temperature), raised and cleared.
  std::vector<json> glitch;
  for (const auto& a : alerts_of(*all, "temperature-unstable")) {
    const double t = a.contains("context") ? a["context"].value("temperature_k", 0.0) : 0.0;
    if (t > 0.095 && t < 0.115) glitch.push_back(a);
  }
  EXPECT_EQ(glitch.size(), 1u) << describe(alerts_of(*all, "temperature-unstable"));
  EXPECT_TRUE(raised_and_cleared(glitch)) << describe(glitch);
  // The overloaded sweep (sweep 4, X clipped at the range for 200 s, from
  // -40 to -20 mT) is clipped outside the fit's window (20 B_phi, about
  // 10 mT at 0.3 K): its L_phi agrees with its partner's (sweep 5) within
  // 3 % and the lockin-overload alert above says what happened. The sweep
  // with the lock-in's first dropout (sweep 2, no readings from -20 to
  // +40 mT) is not fitted across the hole: it is left out of L_phi(T) with
  // the hole named.
  const auto fits = run.query("fits", "film");
  ASSERT_TRUE(fits && fits->is_array()) << run.error();
  auto fit_of = [&](std::int64_t index) {
    for (const auto& f : *fits)
      if (f.value("sweep_index", -1) == index) return f;
    return json::object();
  };
  const double clipped = fit_of(4).value("lphi_m", 0.0), partner = fit_of(5).value("lphi_m", 0.0);
  EXPECT_GT(partner, 0.0);
  EXPECT_NEAR(clipped / partner, 1.0, 0.03) << fit_of(4).dump();
  const json holed = fit_of(2);
  EXPECT_FALSE(holed.value("used_in_dephasing", true)) << holed.dump();
  EXPECT_NE(holed.value("quality", json::array()).dump().find("hole-across-zero"), std::string::npos)
      << holed.dump();
  // L_phi below the minimum at 1 K, at the start and again after the warm-up.
  const auto range = alerts_of(*all, "lphi-range");
  EXPECT_EQ(range.size(), 2u) << describe(range);
  // The film saturates: raised (the cooldown never leaves the state).
  EXPECT_FALSE(alerts_of(*all, "verdict-saturated").empty()) << all->dump(2);
  // Every alert is complete.
  for (const auto& a : *all) {
    for (const char* key : {"id", "rule", "severity", "state", "raised_at", "message"})
      EXPECT_TRUE(a.contains(key)) << key << " missing in " << a.dump();
    const std::string sev = a.value("severity", "");
    EXPECT_TRUE(sev == "info" || sev == "warning" || sev == "critical") << a.dump();
  }
}

TEST(ScenarioAlerts, SaturatingIsRaisedThenClearedWhenSaturated) {
  // saturation.toml: as the cooldown goes on the verdict passes through
  // saturating (the saturation term significant, T_min still above
  // T_sat / 2) to saturated (T_min = 20 mK < 25 mK): verdict-saturating is
  // raised and cleared, verdict-saturated raised and still live at the end.
  LiveRun run;
  ASSERT_TRUE(run.record("saturation.toml", 1.0)) << run.error();
  run.write_config("film", "");
  ASSERT_TRUE(run.start_daemon()) << run.error();
  const auto r = run.replay(run.csv_path(), "film");
  ASSERT_EQ(r.exit_code, 0) << r.out << r.err << run.daemon_log();
  const auto all = run.query("alerts", "", {"--all"});
  ASSERT_TRUE(all && all->is_array()) << run.error();
  EXPECT_TRUE(raised_and_cleared(alerts_of(*all, "verdict-saturating"))) << all->dump(2);
  const auto saturated = alerts_of(*all, "verdict-saturated");
  ASSERT_EQ(saturated.size(), 1u) << all->dump(2);
  EXPECT_NE(saturated[0].value("state", ""), "cleared");
  // The electrons cool: no electrons-not-cooling alert is live at the end.
  for (const auto& a : alerts_of(*all, "electrons-not-cooling"))
    EXPECT_EQ(a.value("state", ""), "cleared") << a.dump();
  // Live alerts (without --all) are the ones not cleared.
  const auto live = run.query("alerts", "");
  ASSERT_TRUE(live && live->is_array()) << run.error();
  for (const auto& a : *live) EXPECT_NE(a.value("state", ""), "cleared") << a.dump();
  EXPECT_FALSE(alerts_of(*live, "verdict-saturated").empty());
  // Every sweep of this scenario is the model plus noise (lock-in and field
  // reading): no fit's chi2_red against the points' own noise reaches the
  // default limit of 3, so fit-chi2 is never raised.
  EXPECT_TRUE(alerts_of(*all, "fit-chi2").empty()) << all->dump(2);
  const auto fits = run.query("fits", "");
  ASSERT_TRUE(fits && fits->is_array() && !fits->empty()) << run.error();
  for (const auto& f : *fits) {
    ASSERT_TRUE(f.at("chi2_red").is_number()) << f.dump();
    EXPECT_LT(f.at("chi2_red").get<double>(), 2.5) << "sweep " << f.value("sweep_index", -1);
  }
}

TEST(ScenarioAlerts, HeatingRaisesElectronsNotCooling) {
  // heating.toml: the electrons stop cooling at 60 mK; the rule is raised
  // and, since the evidence stays, still live at the end.
  LiveRun run;
  ASSERT_TRUE(run.record("heating.toml", 1.0)) << run.error();
  run.write_config("film", "");
  ASSERT_TRUE(run.start_daemon()) << run.error();
  const auto r = run.replay(run.csv_path(), "film");
  ASSERT_EQ(r.exit_code, 0) << r.out << r.err << run.daemon_log();
  const auto all = run.query("alerts", "", {"--all"});
  ASSERT_TRUE(all && all->is_array()) << run.error();
  const auto hot = alerts_of(*all, "electrons-not-cooling");
  ASSERT_EQ(hot.size(), 1u) << all->dump(2);
  EXPECT_EQ(hot[0].value("severity", ""), "critical") << "the rule's default severity";
  EXPECT_NE(hot[0].value("state", ""), "cleared");
}

TEST(ScenarioAlerts, SilentSourcesAreRaisedOnTheWallClock) {
  // source-silent is the one rule on wall time: once the replay has ended
  // nothing arrives, and with silent_s = 2 each of the three sources is
  // reported within a few health ticks (1 s apart). 4500 s hold the first
  // sweep (2600 to 3600 s), closed by the turn after it: a replay that
  // ends without a sweep exits 5.
  LiveRun run;
  ASSERT_TRUE(run.record("saturation.toml", 0.2, {"--duration-s", "4500"})) << run.error();
  run.write_config("film", "", "", "[alerts.source-silent]\nsilent_s = 2.0\n");
  ASSERT_TRUE(run.start_daemon()) << run.error();
  const auto r = run.replay(run.csv_path(), "film");
  ASSERT_EQ(r.exit_code, 0) << r.out << r.err << run.daemon_log();
  std::vector<json> silent;
  for (int i = 0; i < 100 && silent.size() < 3; ++i) {
    std::this_thread::sleep_for(std::chrono::milliseconds(100));
    if (const auto all = run.query("alerts", "", {"--all"})) silent = alerts_of(*all, "source-silent");
  }
  ASSERT_EQ(silent.size(), 3u) << describe(silent);
  std::vector<std::string> subjects;
  for (const auto& a : silent) subjects.push_back(a.value("subject", ""));
  std::sort(subjects.begin(), subjects.end());
  EXPECT_EQ(subjects, (std::vector<std::string>{"lockin", "magnet", "mxc"}));
}

TEST(ScenarioAlerts, LivenessRulesAreRaisedAndClearedOnTheWallClock) {
  // The wall-clock rules after a short replay, with thresholds narrowed:
  //  - source-silent (silent_s = 2): all three sources fall silent after
  //    the replay; one lock-in reading sent afterwards clears the lock-in's;
  //  - gap (quiet_s = 2): that reading skips five sequence numbers, which
  //    the store records as a gap: raised, and cleared 2 s later;
  //  - disk-space (min_free_bytes = 1e18, more than any disk here): raised
  //    at the first health tick; lphid restarted with 1 byte (a restart
  //    keeps live alerts) clears it at its first tick.
  // 4500 s hold the first sweep (a replay without one exits 5).
  LiveRun run;
  ASSERT_TRUE(run.record("saturation.toml", 0.2, {"--duration-s", "4500"})) << run.error();
  const std::string narrowed = "[alerts.source-silent]\nsilent_s = 2.0\n[alerts.gap]\nquiet_s = 2.0\n";
  run.write_config("film", "", "", narrowed + "[alerts.disk-space]\nmin_free_bytes = 1.0e18\n");
  ASSERT_TRUE(run.start_daemon()) << run.error();
  const auto r = run.replay(run.csv_path(), "film");
  ASSERT_EQ(r.exit_code, 0) << r.out << r.err << run.daemon_log();

  // Polls `lphi alerts --all` (100 ms apart, 20 s at most) until `done`.
  auto wait_for = [&](auto done) {
    json all = json::array();
    for (int i = 0; i < 200; ++i) {
      if (const auto a = run.query("alerts", "", {"--all"})) {
        all = *a;
        if (done(all)) break;
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(100));
    }
    return all;
  };
  auto live_for = [](const json& all, const std::string& rule, const std::string& subject) {
    for (const auto& a : alerts_of(all, rule))
      if (a.value("subject", "") == subject && a.value("state", "") != "cleared") return true;
    return false;
  };
  auto cleared_for = [](const json& all, const std::string& rule, const std::string& subject) {
    for (const auto& a : alerts_of(all, rule))
      if (a.value("subject", "") == subject && a.value("state", "") == "cleared") return true;
    return false;
  };
  json all = wait_for([&](const json& a) {
    return live_for(a, "source-silent", "lockin") && live_for(a, "disk-space", "");
  });
  ASSERT_TRUE(live_for(all, "source-silent", "lockin")) << all.dump(2);
  ASSERT_TRUE(live_for(all, "disk-space", "")) << all.dump(2);
  EXPECT_TRUE(alerts_of(all, "gap").empty()) << "the replay had no gap\n" << all.dump(2);

  // One lock-in reading, now, five sequence numbers past the last one.
  const auto status = run.lphi({"status", "--json"});
  ASSERT_EQ(status.exit_code, 0) << status.err;
  std::int64_t last_seq = -1;
  const json status_reply = json::parse(status.out);
  for (const auto& src : status_reply.at("sources"))
    if (src.value("name", "") == "lockin") last_seq = src.value("highest_seq", std::int64_t{-1});
  ASSERT_GE(last_seq, 0) << status.out;
  const double now = std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
  const std::string line = run.file("one.jsonl");
  {
    std::ofstream out(line);
    out.precision(17);
    out << "{\"seq\": " << last_seq + 6 << ", \"t\": " << now << ", \"x_v\": 1.0e-4, \"y_v\": 1.0e-6}\n";
  }
  const auto sent = lphi::testing::run_program(
      {LPHI_PATH, "send", "--data-dir", run.data_dir(), "--source", "lockin"}, line, std::chrono::seconds(30));
  ASSERT_EQ(sent.exit_code, 0) << sent.out << sent.err;

  all = wait_for([&](const json& a) {
    return cleared_for(a, "source-silent", "lockin") && cleared_for(a, "gap", "lockin");
  });
  EXPECT_TRUE(cleared_for(all, "source-silent", "lockin")) << all.dump(2);
  const auto gaps = alerts_of(all, "gap");
  ASSERT_EQ(gaps.size(), 1u) << all.dump(2);
  EXPECT_EQ(gaps[0].value("subject", ""), "lockin");
  EXPECT_TRUE(raised_and_cleared(gaps)) << gaps[0].dump(2);
  // The thermometer and the magnet stay silent.
  EXPECT_TRUE(live_for(all, "source-silent", "mxc")) << all.dump(2);
  EXPECT_TRUE(live_for(all, "source-silent", "magnet")) << all.dump(2);

  ASSERT_EQ(run.stop_daemon(), 0) << run.daemon_log();
  run.write_config("film", "", "", narrowed + "[alerts.disk-space]\nmin_free_bytes = 1.0\n");
  ASSERT_TRUE(run.start_daemon()) << run.error();
  all = wait_for([&](const json& a) { return cleared_for(a, "disk-space", ""); });
  EXPECT_TRUE(raised_and_cleared(alerts_of(all, "disk-space"))) << all.dump(2);
}

}  // namespace
