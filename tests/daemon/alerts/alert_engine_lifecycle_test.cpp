// The alert engine against a real SQLite file: the acknowledge lifecycle,
// restart, the control requests and determinism. The rules themselves are
// in alert_engine_test.cpp (the same executable).
//
// The expected behaviour is the one stated in daemon/alerts/alert_config.hpp
// and alert_engine.hpp (limits, hysteresis margins, clear_after counts);
// the limits themselves are the defaults there (common practice, see
// analysis/live_checks.hpp).
#include <string>

#include "tests/daemon/alerts/alert_engine_fixture.hpp"
#include "tests/daemon/alerts/alert_test_support.hpp"

namespace lphi::alerts {
namespace {

using namespace testing;  // the Engine fixture and its helpers

TEST_F(Engine, AcknowledgeLifecycle) {
  auto e = make_engine(db);
  FitFact bad = good_fit(1, 100.0);
  bad.chi2_red = 7.0;
  e->on_fit(bad);
  const std::int64_t id = e->list(false).at(0).id;

  const auto reply = e->handle_request({{"type", "ack"}, {"id", id}});
  EXPECT_EQ(reply, (nlohmann::json{{"type", "ack"}, {"id", id}, {"state", "acknowledged"}}));
  auto live = e->list(false);
  ASSERT_EQ(live.size(), 1u);  // acknowledged alerts stay live until cleared
  EXPECT_EQ(live[0].state, State::acknowledged);
  ASSERT_TRUE(live[0].acked_at.has_value());
  EXPECT_EQ(events(id, "acknowledged"), 1);
  // Twice is harmless and stores nothing new.
  EXPECT_EQ(e->handle_request({{"type", "ack"}, {"id", id}})["type"], "ack");
  EXPECT_EQ(events(id, "acknowledged"), 1);

  // Re-triggered while acknowledged: updated, still acknowledged.
  bad.sweep_id = 2;
  bad.t = 200.0;
  bad.chi2_red = 9.0;
  e->on_fit(bad);
  live = e->list(false);
  EXPECT_EQ(live.at(0).state, State::acknowledged);
  EXPECT_EQ(live.at(0).value, std::optional<double>(9.0));

  e->on_fit(good_fit(3, 300.0));
  e->on_fit(good_fit(4, 400.0));
  EXPECT_TRUE(e->list(false).empty());
  const auto cleared = e->handle_request({{"type", "ack"}, {"id", id}});
  EXPECT_EQ(cleared["type"], "error");
  EXPECT_NE(cleared["detail"].get<std::string>().find("already cleared"), std::string::npos) << cleared;
  const auto missing = e->handle_request({{"type", "ack"}, {"id", 999}});
  EXPECT_EQ(missing["type"], "error");
  EXPECT_NE(missing["detail"].get<std::string>().find("no alert has id 999"), std::string::npos);
  e.settle();  // the engine's writes are the store writer's: wait until they are durable
  // The stored row keeps every time.
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM alerts WHERE id = " + std::to_string(id) +
                              " AND state = 'cleared' AND raised_at = 100 AND cleared_at = 400"
                              " AND acked_at IS NOT NULL"),
            1);
}

TEST_F(Engine, RestartKeepsStateAndContinuesIds) {
  std::int64_t acked = 0;
  {
    auto e = make_engine(db);
    FitFact bad = good_fit(1, 100.0);
    bad.ok = false;
    bad.chi2_red = 8.0;
    e->on_fit(bad);  // fit-failed only (a failed fit has no chi-square to judge)
    SweepFact s = good_sweep(1, 100.0);
    s.temperature_unstable = true;
    e->on_sweep(s);
    acked = find_rule(e->list(false), "fit-failed")->id;
    ASSERT_TRUE(e->acknowledge(acked, 150.0).ok());
    e->on_sweep(good_sweep(2, 200.0));  // one of two good sweeps before the restart
  }
  auto e = make_engine(db);
  auto live = e->list(false);
  ASSERT_EQ(live.size(), 2u);
  auto failed = find_rule(live, "fit-failed");
  ASSERT_TRUE(failed);
  EXPECT_EQ(failed->id, acked);
  EXPECT_EQ(failed->state, State::acknowledged);
  EXPECT_EQ(failed->acked_at, std::optional<double>(150.0));
  EXPECT_EQ(failed->raised_at, 100.0);
  // The progress toward the clear survived: one more good sweep clears.
  e->on_sweep(good_sweep(3, 300.0));
  EXPECT_FALSE(find_rule(e->list(false), "temperature-unstable"));
  // A new alert continues the ids.
  FitFact bad = good_fit(4, 400.0);
  bad.lphi_m = 1.0;
  e->on_fit(bad);
  auto range = find_rule(e->list(false), "lphi-range");
  ASSERT_TRUE(range);
  EXPECT_EQ(range->id, 3);
}

// A source silent before a restart is not "back" because lphid restarted:
// only a reading that arrives clears source-silent. A gap alert from before
// waits a full quiet_s after the restart.
TEST_F(Engine, RestartKeepsHealthAlerts) {
  AlertConfig c;
  c.source_silent.silent_s = 30.0;
  c.gap.quiet_s = 100.0;
  const double t0 = 1.7e9;
  {
    auto e = make_engine(db, c);
    HealthFact h;
    h.now_unix = t0;
    h.sources = {{"mxc", std::nullopt, 0}};
    e->on_health(h);
    h.now_unix = t0 + 31.0;
    h.sources = {{"mxc", std::nullopt, 4}};
    e->on_health(h);
    ASSERT_EQ(e->list(false).size(), 2u);
  }
  auto e = make_engine(db, c);
  HealthFact h;
  h.now_unix = t0 + 40.0;
  h.sources = {{"mxc", std::nullopt, 4}};
  e->on_health(h);
  auto live = e->list(false);
  EXPECT_TRUE(find_rule(live, "source-silent", "mxc"));
  EXPECT_TRUE(find_rule(live, "gap", "mxc"));
  h.now_unix = t0 + 41.0;
  h.sources = {{"mxc", t0 + 41.0, 4}};
  e->on_health(h);
  live = e->list(false);
  EXPECT_FALSE(find_rule(live, "source-silent", "mxc"));
  EXPECT_TRUE(find_rule(live, "gap", "mxc"));
  h.now_unix = t0 + 140.0;  // 100 s after the restart
  h.sources = {{"mxc", t0 + 140.0, 4}};
  e->on_health(h);
  EXPECT_TRUE(e->list(false).empty());
  e.settle();  // the engine's writes are the store writer's: wait until they are durable
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM alerts"), 2);  // nothing raised twice
}

// The same facts give the same alerts (ids, times, values, messages).
TEST_F(Engine, SameFactsSameAlerts) {
  auto run = [](const std::string& path) {
    auto e = make_engine(path);
    for (int i = 0; i < 40; ++i) {
      const double t = 1000.0 + 60.0 * i;
      SweepFact s = good_sweep(i, t);
      s.temperature_unstable = (i % 7 == 3);
      s.max_quadrature_ratio = 0.05 + 0.01 * (i % 9);
      e->on_sweep(s);
      FitFact f = good_fit(i, t);
      f.chi2_red = 2.0 + 0.15 * (i % 11);
      f.ok = (i % 13 != 5);
      e->on_fit(f);
      VerdictFact v{"film", t, i < 20 ? "power-law" : (i < 30 ? "saturating" : "saturated"),
                    i < 25, std::nullopt, std::nullopt, std::nullopt};
      e->on_verdict(v);
    }
    nlohmann::json out = nlohmann::json::array();
    for (const Alert& a : e->list(true)) out.push_back(alert_json(a));
    return out;
  };
  const auto first = run(db);
  const auto second = run(dir.file("again.db"));
  EXPECT_GT(first.size(), 5u);
  EXPECT_EQ(first, second);
}

TEST_F(Engine, AlertsRequest) {
  auto e = make_engine(db);
  FitFact bad = good_fit(1, 10.0, "film");
  bad.chi2_red = 10.0;
  e->on_fit(bad);
  bad.sample = "wire";
  e->on_fit(bad);
  for (int i = 2; i < 4; ++i) e->on_fit(good_fit(i, 10.0 * i, "wire"));  // clears the wire's

  const auto live = e->handle_request({{"type", "alerts"}});
  ASSERT_EQ(live["type"], "alerts");
  ASSERT_EQ(live["alerts"].size(), 1u);
  const auto& a = live["alerts"][0];
  for (const char* key : {"id", "rule", "severity", "state", "raised_at", "acked_at", "cleared_at",
                          "message", "subject", "value", "context"}) {
    EXPECT_TRUE(a.contains(key)) << key;
  }
  EXPECT_EQ(a["subject"], "film");
  EXPECT_EQ(a["severity"], "warning");
  EXPECT_EQ(a["state"], "raised");
  EXPECT_TRUE(a["acked_at"].is_null());

  EXPECT_EQ(e->handle_request({{"type", "alerts"}, {"all", true}})["alerts"].size(), 2u);
  const auto wire = e->handle_request({{"type", "alerts"}, {"all", true}, {"sample", "wire"}});
  ASSERT_EQ(wire["alerts"].size(), 1u);
  EXPECT_EQ(wire["alerts"][0]["state"], "cleared");
  EXPECT_EQ(wire["alerts"][0]["cleared_at"], 30.0);
  EXPECT_TRUE(e->handle_request({{"type", "alerts"}, {"sample", "nobody"}})["alerts"].empty());
}

TEST_F(Engine, BadRequestsNameWhatIsWrong) {
  auto e = make_engine(db);
  struct Case {
    nlohmann::json request;
    std::string reason;
    std::string words;
  };
  const Case cases[] = {
      {{{"type", "alerts"}, {"all", "yes"}}, "wrong_type", "\"all\""},
      {{{"type", "alerts"}, {"sampel", "film"}}, "unknown_field", "sampel"},
      {{{"type", "ack"}}, "missing_field", "\"id\""},
      {{{"type", "ack"}, {"id", "7"}}, "wrong_type", "\"id\""},
      {{{"type", "ack"}, {"id", 1.5}}, "wrong_type", "\"id\""},
      {{{"type", "ack"}, {"id", 7}, {"force", true}}, "unknown_field", "force"},
      {{{"type", "mute"}}, "unknown_type", "mute"},
      {nlohmann::json::array(), "not_an_object", "object"},
  };
  for (const Case& c : cases) {
    const auto reply = e->handle_request(c.request);
    EXPECT_EQ(reply["type"], "error") << c.request;
    EXPECT_EQ(reply["reason"], c.reason) << c.request;
    EXPECT_NE(reply["detail"].get<std::string>().find(c.words), std::string::npos) << reply;
  }
}

// alert_events keeps the event time and the wall time of each change.
TEST_F(Engine, EventsStoreBothTimes) {
  auto e = make_engine(db);
  FitFact bad = good_fit(1, 1234.5);
  bad.ok = false;
  const auto before = static_cast<std::int64_t>(
      std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count());
  e->on_fit(bad);
  e.settle();  // the engine's writes are the store writer's: wait until they are durable
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM alert_events WHERE t = 1234.5 AND change = 'raised'"), 1);
  EXPECT_GE(query_int(db, "SELECT CAST(wall_time AS INTEGER) FROM alert_events"), before);
}

TEST_F(Engine, UnopenableDatabaseIsAnError) {
  std::unique_ptr<store::StoreWriter> writer;
  ASSERT_TRUE(store::StoreWriter::open(db, {}, writer).ok());
  std::unique_ptr<AlertEngine> e;
  const auto s = AlertEngine::create({}, *writer, dir.file("no/such/dir/lphi.db"), nullptr, e);
  EXPECT_FALSE(s.ok());
  EXPECT_NE(s.message().find("no/such/dir"), std::string::npos) << s.message();
  EXPECT_EQ(e, nullptr);
}

}  // namespace
}  // namespace lphi::alerts
