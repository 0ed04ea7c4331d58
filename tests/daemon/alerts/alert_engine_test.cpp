// The alert engine against a real SQLite file: every rule raised and
// cleared by facts, hysteresis and throttling. The acknowledge lifecycle,
// restart, the control requests and determinism are in
// alert_engine_lifecycle_test.cpp (the same executable).
//
// The expected behaviour is the one stated in daemon/alerts/alert_config.hpp
// and alert_engine.hpp (limits, hysteresis margins, clear_after counts);
// the limits themselves are the defaults there (common practice, see
// analysis/live_checks.hpp).
#include <cmath>
#include <limits>

#include "tests/daemon/alerts/alert_engine_fixture.hpp"
#include "tests/daemon/alerts/alert_test_support.hpp"

namespace lphi::alerts {
namespace {

using namespace testing;  // the Engine fixture and its helpers

// Raised by the first bad fact, still live after clear_after - 1 good ones,
// cleared by the clear_after-th at that fact's event time.
TEST_F(Engine, FitFailedRaisedAndCleared) {
  auto e = make_engine(db);
  FitFact bad = good_fit(1, 1000.0);
  bad.ok = false;
  bad.error = "too few points in the window";
  e->on_fit(bad);
  auto live = e->list(false);
  ASSERT_EQ(live.size(), 1u);
  EXPECT_EQ(live[0].rule, "fit-failed");
  EXPECT_EQ(live[0].subject, "film");
  EXPECT_EQ(live[0].severity, Severity::warning);
  EXPECT_EQ(live[0].state, State::raised);
  EXPECT_EQ(live[0].raised_at, 1000.0);
  EXPECT_NE(live[0].message.find("too few points"), std::string::npos) << live[0].message;
  EXPECT_EQ(live[0].context["sweep_id"], 1);

  e->on_fit(good_fit(2, 1100.0));
  ASSERT_TRUE(find_rule(e->list(false), "fit-failed"));  // clear_after = 2
  e->on_fit(good_fit(3, 1200.0));
  EXPECT_FALSE(find_rule(e->list(false), "fit-failed"));
  const auto all = e->list(true);
  auto cleared = find_rule(all, "fit-failed");
  ASSERT_TRUE(cleared);
  EXPECT_EQ(cleared->state, State::cleared);
  EXPECT_EQ(cleared->cleared_at, std::optional<double>(1200.0));
  e.settle();  // the engine's writes are the store writer's: wait until they are durable
  EXPECT_EQ(events(cleared->id, "raised"), 1);
  EXPECT_EQ(events(cleared->id, "cleared"), 1);
  // A fit that converged=false is a failure as well.
  FitFact stuck = good_fit(4, 1300.0);
  stuck.converged = false;
  e->on_fit(stuck);
  auto again = find_rule(e->list(false), "fit-failed");
  ASSERT_TRUE(again);
  EXPECT_NE(again->message.find("did not converge"), std::string::npos);
  EXPECT_GT(again->id, cleared->id);  // a new alert after a clear
}

TEST_F(Engine, LphiRangeBothSides) {
  auto e = make_engine(db);
  FitFact small = good_fit(1, 10.0);
  small.lphi_m = 5e-9;  // below min_m = 10 nm
  e->on_fit(small);
  auto a = find_rule(e->list(false), "lphi-range");
  ASSERT_TRUE(a);
  EXPECT_EQ(a->value, std::optional<double>(5e-9));
  const std::int64_t first = a->id;
  FitFact large = good_fit(2, 20.0);
  large.lphi_m = 2e-4;  // above max_m = 100 um: the same live alert, updated
  e->on_fit(large);
  a = find_rule(e->list(false), "lphi-range");
  ASSERT_TRUE(a);
  EXPECT_EQ(a->id, first);
  EXPECT_EQ(a->count, 2);
  EXPECT_EQ(a->value, std::optional<double>(2e-4));
  e.settle();  // the engine's writes are the store writer's: wait until they are durable
  EXPECT_EQ(events(first, "updated"), 1);
  // 10.5 nm is inside but not by the 10 % margin (11 nm): no progress.
  FitFact edge = good_fit(3, 30.0);
  edge.lphi_m = 10.5e-9;
  e->on_fit(edge);
  e->on_fit(edge);
  EXPECT_TRUE(find_rule(e->list(false), "lphi-range"));
  e->on_fit(good_fit(4, 40.0));
  e->on_fit(good_fit(5, 50.0));
  EXPECT_FALSE(find_rule(e->list(false), "lphi-range"));
  // A failed fit has no L_phi and leaves lphi-range alone.
  FitFact failed = good_fit(6, 60.0);
  failed.ok = false;
  failed.lphi_m = 0.0;
  e->on_fit(failed);
  EXPECT_FALSE(find_rule(e->list(false), "lphi-range"));
}

// A chi2_red flapping around the limit raises one alert, which only clears
// once chi2_red stays below limit * (1 - hysteresis) = 3 * 0.8 = 2.4 for
// clear_after = 2 fits in a row.
TEST_F(Engine, FlappingChiSquareRaisesOnce) {
  auto e = make_engine(db);
  const double chi2[] = {3.1, 2.9, 3.2, 2.8, 3.05, 2.5, 2.3, 3.3, 2.0, 2.6, 2.0};
  double t = 0.0;
  std::int64_t sweep = 0;
  for (double c : chi2) {
    FitFact f = good_fit(++sweep, t += 60.0);
    f.chi2_red = c;
    e->on_fit(f);
  }
  // 2.0, 2.6 (band: the run restarts), 2.0: one good fit only, still live.
  auto all = e->list(true);
  ASSERT_EQ(all.size(), 1u);
  EXPECT_EQ(all[0].rule, "fit-chi2");
  EXPECT_EQ(all[0].state, State::raised);
  EXPECT_EQ(all[0].count, 4);  // 3.1, 3.2, 3.05, 3.3 above 3
  EXPECT_EQ(all[0].value, std::optional<double>(3.3));
  FitFact f = good_fit(++sweep, t += 60.0);
  f.chi2_red = 1.0;
  e->on_fit(f);
  all = e->list(true);
  ASSERT_EQ(all.size(), 1u);
  EXPECT_EQ(all[0].state, State::cleared);
  e.settle();  // the engine's writes are the store writer's: wait until they are durable
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM alert_events WHERE change = 'raised'"), 1);
  EXPECT_EQ(query_int(db, "SELECT count(*) FROM alerts"), 1);
}

// field-offset: the larger of |offset| and |lag field| over B_phi against
// 0.2. A 0.3 mT remanent field on a sweep with B_phi = 0.5 mT (0.6 of B_phi)
// raises it with the fit's advice in the message; the same offset against
// B_phi = 5 mT (0.06) does not, and two such fits clear it (clear_after 2).
// A lag field alone raises it too; a fit without a centred field axis (no
// offset) leaves the rule alone.
TEST_F(Engine, FieldOffsetIsJudgedAgainstBphiWithTheAdvice) {
  auto e = make_engine(db);
  FitFact f = good_fit(1, 60.0);
  f.b_phi_t = 0.5e-3;
  f.field_offset_t = 0.3e-3;
  f.advice = "the field offset is 0.30 mT: the magnet holds a remanent field";
  e->on_fit(f);
  auto raised = find_rule(e->list(false), "field-offset");
  ASSERT_TRUE(raised);
  EXPECT_NEAR(raised->value.value_or(0.0), 0.6, 1e-12);
  EXPECT_NE(raised->message.find("0.3 mT"), std::string::npos) << raised->message;
  EXPECT_NE(raised->message.find("remanent field"), std::string::npos) << raised->message;
  FitFact wide = good_fit(2, 120.0);
  wide.b_phi_t = 5e-3;
  wide.field_offset_t = 0.3e-3;
  e->on_fit(wide);
  EXPECT_TRUE(find_rule(e->list(false), "field-offset"));
  wide = good_fit(3, 180.0);
  wide.b_phi_t = 5e-3;
  wide.field_offset_t = 0.3e-3;
  e->on_fit(wide);
  EXPECT_FALSE(find_rule(e->list(false), "field-offset"));
  FitFact lag = good_fit(4, 240.0);
  lag.b_phi_t = 1e-3;
  lag.field_offset_t = 0.0;
  lag.lag_field_t = -0.4e-3;
  e->on_fit(lag);
  raised = find_rule(e->list(false), "field-offset");
  ASSERT_TRUE(raised);
  EXPECT_NEAR(raised->value.value_or(0.0), 0.4, 1e-12);
  FitFact unmeasured = good_fit(5, 300.0);
  unmeasured.b_phi_t = 1e-3;
  e->on_fit(unmeasured);
  e->on_fit(unmeasured);
  EXPECT_TRUE(find_rule(e->list(false), "field-offset")) << "a fit without an offset judges nothing";
}

TEST_F(Engine, SweepRulesRaisedAndCleared) {
  auto e = make_engine(db);
  SweepFact s = good_sweep(1, 500.0);
  s.temperature_unstable = true;
  s.temperature_spread_k = 0.004;
  s.n_overload = 3;
  s.max_quadrature_ratio = std::numeric_limits<double>::infinity();  // X = 0, Y != 0
  s.excitation_ratio = 2.5;
  e->on_sweep(s);
  auto live = e->list(false);
  ASSERT_EQ(live.size(), 4u);
  auto unstable = find_rule(live, "temperature-unstable");
  auto overload = find_rule(live, "lockin-overload");
  auto quadrature = find_rule(live, "quadrature");
  auto heating = find_rule(live, "excitation-heating");
  ASSERT_TRUE(unstable && overload && quadrature && heating);
  EXPECT_EQ(unstable->severity, Severity::info);
  EXPECT_EQ(overload->value, std::optional<double>(3.0));
  EXPECT_FALSE(quadrature->value.has_value());  // infinite: no number, said in the context
  EXPECT_EQ(quadrature->context["max_quadrature_ratio"], "infinite");
  EXPECT_EQ(heating->value, std::optional<double>(2.5));
  // Quadrature 0.09 is inside but within the 20 % margin (0.08): not good.
  SweepFact edge = good_sweep(2, 600.0);
  edge.max_quadrature_ratio = 0.09;
  e->on_sweep(edge);
  e->on_sweep(good_sweep(3, 700.0));
  live = e->list(false);
  ASSERT_EQ(live.size(), 1u);
  EXPECT_EQ(live[0].rule, "quadrature");
  e->on_sweep(good_sweep(4, 800.0));
  EXPECT_TRUE(e->list(false).empty());
  for (const Alert& a : e->list(true)) {
    EXPECT_EQ(a.state, State::cleared) << a.rule;
    EXPECT_EQ(a.cleared_at, std::optional<double>(a.rule == "quadrature" ? 800.0 : 700.0)) << a.rule;
  }
}

TEST_F(Engine, OverloadLimitIsAPointCount) {
  AlertConfig c;
  c.lockin_overload.max_points = 5;
  auto e = make_engine(db, c);
  SweepFact s = good_sweep(1, 1.0);
  s.n_overload = 5;  // at the limit: fine
  e->on_sweep(s);
  EXPECT_TRUE(e->list(false).empty());
  s.n_overload = 6;
  e->on_sweep(s);
  EXPECT_TRUE(find_rule(e->list(false), "lockin-overload"));
}

TEST_F(Engine, VerdictRules) {
  auto e = make_engine(db);
  VerdictFact v{"film", 100.0, "power-law", true, std::nullopt, std::nullopt, std::nullopt};
  e->on_verdict(v);
  EXPECT_TRUE(e->list(false).empty());
  v = {"film", 200.0, "saturating", true, "unknown", 0.05, std::nullopt};
  e->on_verdict(v);
  auto saturating = find_rule(e->list(false), "verdict-saturating");
  ASSERT_TRUE(saturating);
  EXPECT_EQ(saturating->severity, Severity::info);
  EXPECT_EQ(saturating->value, std::optional<double>(0.05));
  // saturated: raised at once; saturating clears after two verdicts outside it.
  v = {"film", 300.0, "saturated", false, "electron-heating-or-noise", 0.04, 2e-6};
  e->on_verdict(v);
  auto live = e->list(false);
  EXPECT_TRUE(find_rule(live, "verdict-saturating"));
  auto saturated = find_rule(live, "verdict-saturated");
  ASSERT_TRUE(saturated);
  EXPECT_EQ(saturated->severity, Severity::warning);
  EXPECT_NE(saturated->message.find("electron-heating-or-noise"), std::string::npos);
  auto cooling = find_rule(live, "electrons-not-cooling");
  ASSERT_TRUE(cooling);
  EXPECT_EQ(cooling->severity, Severity::critical);
  v.t = 400.0;
  v.electrons_cooling = std::nullopt;  // unknown: neither good nor bad
  e->on_verdict(v);
  live = e->list(false);
  EXPECT_FALSE(find_rule(live, "verdict-saturating"));
  EXPECT_TRUE(find_rule(live, "electrons-not-cooling"));
  v = {"film", 500.0, "power-law", true, std::nullopt, std::nullopt, std::nullopt};
  e->on_verdict(v);
  v.t = 600.0;
  e->on_verdict(v);
  EXPECT_TRUE(e->list(false).empty());
}

// Messages name a sweep by the index `lphi sweeps` lists (from 0), not by
// its row id in the database (from 1); the context keeps both.
TEST_F(Engine, MessagesNameTheSweepIndexPeopleSee) {
  auto e = make_engine(db);
  FitFact failed = good_fit(8, 100.0);  // row id 8, index 7
  ASSERT_EQ(failed.sweep_index, 7);
  failed.ok = false;
  failed.error = "the sweep could not be prepared";
  e->on_fit(failed);
  SweepFact overloaded = good_sweep(8, 100.0);
  overloaded.n_overload = 12;
  e->on_sweep(overloaded);
  for (const char* rule : {"fit-failed", "lockin-overload"}) {
    auto a = find_rule(e->list(false), rule);
    ASSERT_TRUE(a) << rule;
    EXPECT_NE(a->message.find("sweep 7"), std::string::npos) << a->message;
    EXPECT_EQ(a->message.find("sweep 8"), std::string::npos) << a->message;
    EXPECT_EQ(a->context["sweep_index"], 7) << rule;
    EXPECT_EQ(a->context["sweep_id"], 8) << rule;
  }
}

// A new cooldown's verdicts judge the rules afresh: insufficient-data
// clears verdict-saturated (clear_after 2); a null electrons_cooling keeps
// electrons-not-cooling (no evidence either way), true clears it. The
// cooldown is in the context and the message.
TEST_F(Engine, ANewCooldownClearsTheVerdictAlertsOfTheLastOne) {
  auto e = make_engine(db);
  VerdictFact hot{"film", 100.0, "saturated", false, "electron-heating-or-noise", 0.06, 1e-6};
  hot.cooldown = 1;
  e->on_verdict(hot);
  auto saturated = find_rule(e->list(false), "verdict-saturated");
  ASSERT_TRUE(saturated);
  EXPECT_EQ(saturated->context["cooldown"], 1);
  EXPECT_NE(saturated->message.find("cooldown 1"), std::string::npos) << saturated->message;
  VerdictFact fresh{"film", 200.0, "insufficient-data", std::nullopt, std::nullopt, std::nullopt, std::nullopt};
  fresh.cooldown = 2;
  e->on_verdict(fresh);
  fresh.t = 300.0;
  e->on_verdict(fresh);
  EXPECT_FALSE(find_rule(e->list(false), "verdict-saturated"));
  EXPECT_TRUE(find_rule(e->list(false), "electrons-not-cooling")) << "null is no evidence";
  VerdictFact cool{"film", 400.0, "power-law", true, std::nullopt, std::nullopt, std::nullopt};
  cool.cooldown = 2;
  e->on_verdict(cool);
  EXPECT_TRUE(find_rule(e->list(false), "electrons-not-cooling")) << "clear_after = 2";
  cool.t = 500.0;
  e->on_verdict(cool);
  EXPECT_TRUE(e->list(false).empty());
  auto cleared = find_rule(e->list(true), "electrons-not-cooling");
  ASSERT_TRUE(cleared);
  EXPECT_EQ(cleared->cleared_at, std::optional<double>(500.0));
}

TEST_F(Engine, HealthRules) {
  AlertConfig c;
  c.source_silent.silent_s = 30.0;
  c.gap.quiet_s = 100.0;
  auto e = make_engine(db, c);
  const double t0 = 1.7e9;
  HealthFact h;
  h.now_unix = t0;
  h.sources = {{"lockin", t0 - 1.0, 2}, {"thermometer", std::nullopt, 0}};
  h.disk_free_bytes = 50e9;
  h.writer_lag_s = 0.1;
  e->on_health(h);
  EXPECT_TRUE(e->list(false).empty());  // gaps seen at the first tick are history

  h.now_unix = t0 + 40.0;  // no thermometer reading since the first tick 40 s ago
  h.sources = {{"lockin", t0 + 39.0, 5}, {"thermometer", std::nullopt, 0}};
  h.disk_free_bytes = 1e9;   // below 2 GB
  h.writer_lag_s = 12.0;     // above 10 s
  e->on_health(h);
  auto live = e->list(false);
  ASSERT_EQ(live.size(), 4u);
  auto silent = find_rule(live, "source-silent", "thermometer");
  ASSERT_TRUE(silent);
  EXPECT_EQ(silent->value, std::optional<double>(40.0));
  EXPECT_EQ(silent->raised_at, t0 + 40.0);
  auto gap = find_rule(live, "gap", "lockin");
  ASSERT_TRUE(gap);
  EXPECT_EQ(gap->value, std::optional<double>(3.0));  // 5 - 2 new gaps
  ASSERT_TRUE(find_rule(live, "disk-space", ""));
  ASSERT_TRUE(find_rule(live, "writer-lag", ""));

  // Disk at 2.1 GB is above the limit but within its 10 % margin; lag 4 s
  // is below 10 * (1 - 0.5) = 5 s (writer-lag needs 3 such ticks).
  h.now_unix = t0 + 41.0;
  h.sources = {{"lockin", t0 + 41.0, 5}, {"thermometer", t0 + 41.0, 0}};
  h.disk_free_bytes = 2.1e9;
  h.writer_lag_s = 4.0;
  e->on_health(h);
  live = e->list(false);
  EXPECT_FALSE(find_rule(live, "source-silent", "thermometer"));
  EXPECT_TRUE(find_rule(live, "disk-space", ""));
  EXPECT_TRUE(find_rule(live, "gap", "lockin"));
  h.now_unix = t0 + 42.0;
  h.disk_free_bytes = 2.3e9;
  e->on_health(h);
  h.now_unix = t0 + 43.0;
  e->on_health(h);
  live = e->list(false);
  EXPECT_FALSE(find_rule(live, "disk-space", ""));
  EXPECT_FALSE(find_rule(live, "writer-lag", ""));
  EXPECT_TRUE(find_rule(live, "gap", "lockin"));  // quiet for only 3 s
  h.now_unix = t0 + 140.0;                                // 100 s after the last new gap
  h.sources = {{"lockin", t0 + 140.0, 5}, {"thermometer", t0 + 140.0, 0}};
  e->on_health(h);
  EXPECT_TRUE(e->list(false).empty());
}

// While a health condition lasts, the once-a-second ticks update the live
// alert in memory but store an update at most once a minute.
TEST_F(Engine, HealthUpdatesAreThrottled) {
  auto e = make_engine(db);
  HealthFact h;
  h.writer_lag_s = 20.0;
  for (int i = 0; i < 30; ++i) {
    h.now_unix = 1.7e9 + i;
    e->on_health(h);
  }
  auto lag = find_rule(e->list(false), "writer-lag", "");
  ASSERT_TRUE(lag);
  EXPECT_EQ(lag->count, 30);
  EXPECT_EQ(find_rule(e->list(true), "writer-lag", "")->count, 30);  // all: the live state too
  e.settle();  // the engine's writes are the store writer's: wait until they are durable
  EXPECT_EQ(events(lag->id, "raised"), 1);
  EXPECT_EQ(events(lag->id, "updated"), 0);
}

TEST_F(Engine, DisabledRuleStaysQuiet) {
  AlertConfig c;
  c.fit_failed.enabled = false;
  auto e = make_engine(db, c);
  FitFact bad = good_fit(1, 1.0);
  bad.ok = false;
  e->on_fit(bad);
  EXPECT_TRUE(e->list(true).empty());
}

}  // namespace
}  // namespace lphi::alerts
