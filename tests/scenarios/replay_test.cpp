// Replay determinism and restart: the same recording into two fresh daemons
// gives identical fits and verdicts; a cooldown replayed in two halves with
// lphid stopped and started between them ends with the verdict of one
// uninterrupted run (event time only inside the analysis; stored fits are
// loaded, not refitted, on restart).
#include <gtest/gtest.h>

#include <nlohmann/json.hpp>
#include <string>

#include "tests/scenarios/live_run.hpp"

namespace {

using lphi::testing::LiveRun;
using nlohmann::json;

// Unix time of the recording's relative time 0 (2023-11-14): both replays
// put the readings at the same times (by default `lphi replay` makes a
// relative recording end now), and the halves of a split recording keep
// their place in time.
constexpr double kEpoch = 1.7e9;

TEST(ScenarioReplay, SameRecordingSameFitsAndVerdict) {
  LiveRun run;
  ASSERT_TRUE(run.record("saturation.toml", 1.0)) << run.error();
  run.write_config("film", "");
  json fits[2], verdict[2];
  for (int k = 0; k < 2; ++k) {
    ASSERT_TRUE(run.start_daemon("data" + std::to_string(k))) << run.error();
    const auto r = run.replay(run.csv_path(), "film", kEpoch);
    ASSERT_EQ(r.exit_code, 0) << r.out << r.err << run.daemon_log();
    auto f = run.query("fits", "film");
    auto v = run.verdict("film");
    ASSERT_TRUE(f && v) << run.error();
    fits[k] = *f;
    verdict[k] = *v;
    EXPECT_EQ(run.stop_daemon(), 0);
  }
  ASSERT_GT(fits[0].size(), 10u);
  EXPECT_EQ(fits[0], fits[1]);
  EXPECT_EQ(verdict[0], verdict[1]);
}

TEST(ScenarioReplay, RestartInTheMiddleEndsWithTheSameVerdict) {
  // Split between plateaus 4 (0.1 K, ends at 25 500 s) and 5 (its ramp
  // starts there): no sweep straddles the cut.
  LiveRun run;
  ASSERT_TRUE(run.record("saturation.toml", 1.0)) << run.error();
  const std::string whole = run.file("whole.csv"), first = run.file("first.csv"), rest = run.file("rest.csv");
  ASSERT_TRUE(lphi::testing::copy_recording(run.csv_path(), whole, kEpoch, 0, 1e9));
  ASSERT_TRUE(lphi::testing::copy_recording(run.csv_path(), first, kEpoch, 0, 25600));
  ASSERT_TRUE(lphi::testing::copy_recording(run.csv_path(), rest, kEpoch, 25600, 1e9));
  run.write_config("film", "");

  ASSERT_TRUE(run.start_daemon("uninterrupted")) << run.error();
  auto r = run.replay(whole, "film");
  ASSERT_EQ(r.exit_code, 0) << r.out << r.err << run.daemon_log();
  const auto v_whole = run.verdict("film");
  const auto f_whole = run.query("fits", "film");
  ASSERT_TRUE(v_whole && f_whole) << run.error();
  EXPECT_EQ(run.stop_daemon(), 0);

  ASSERT_TRUE(run.start_daemon("restarted")) << run.error();
  r = run.replay(first, "film");
  ASSERT_EQ(r.exit_code, 0) << r.out << r.err << run.daemon_log();
  const auto v_half = run.verdict("film");
  ASSERT_TRUE(v_half) << run.error();
  EXPECT_EQ(run.stop_daemon(), 0) << "a clean stop in the middle of the cooldown";
  ASSERT_TRUE(run.start_daemon("restarted")) << run.error();
  r = run.replay(rest, "film");
  ASSERT_EQ(r.exit_code, 0) << r.out << r.err << run.daemon_log();
  const auto v_end = run.verdict("film");
  const auto f_end = run.query("fits", "film");
  ASSERT_TRUE(v_end && f_end) << run.error();

  EXPECT_EQ(*v_end, *v_whole);
  EXPECT_EQ(*f_end, *f_whole);
  // Halfway (down to 0.1 K) the film did not look saturated yet.
  EXPECT_NE(v_half->value("state", ""), v_whole->value("state", "")) << v_half->dump(2);
}

}  // namespace
