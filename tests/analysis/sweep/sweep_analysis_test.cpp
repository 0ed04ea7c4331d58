// sweep::analyze, the one analysis of a sweep, on legs made from the exact
// HLN function with known faults (tests/analysis/sweep/leg_maker.hpp): the
// length comes back within 3 standard errors (scaled by error_scale) or 5 %
// of the truth, or the sweep is kept out of L_phi(T) with its reason.
#include "analysis/sweep_analysis.hpp"

#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

#include "analysis/conductance.hpp"
#include "analysis/magnetoconductance.hpp"
#include "analysis/sweep_fit.hpp"
#include "analysis/sweep_residuals.hpp"
#include "schema/result_json.hpp"
#include "tests/analysis/sweep/leg_maker.hpp"

namespace sw = lphi::sweep;
using lphi::testing::LegPlan;
using lphi::testing::make_leg;

namespace {

std::vector<sw::Reading> readings(const LegPlan& plan) {
  std::vector<sw::Reading> out;
  for (const auto& p : make_leg(plan)) out.push_back({p.t_s, p.field_t, p.value, plan.tau_s});
  return out;
}

// An up leg and the down leg after it, same plateau.
std::vector<std::vector<sw::Reading>> both_legs(LegPlan up) {
  LegPlan down = up;
  down.up = false;
  down.seed = up.seed + 1000;
  down.t0_s = up.t0_s + (up.max_field_t - up.min_field_t) / up.rate_t_per_s + 10.0;
  return {readings(up), readings(down)};
}

std::string fmt_label(double lphi_m, double remanent_t) {
  char buf[96];
  std::snprintf(buf, sizeof buf, "L_phi %.0f nm, remanent %.1f mT", lphi_m * 1e9, remanent_t * 1e3);
  return buf;
}

void expect_length(const sw::Analysis& a, double truth_m, const std::string& label) {
  ASSERT_TRUE(a.ok) << a.error;
  ASSERT_TRUE(a.fit.ok) << label << ": " << a.fit.error;
  const double err = a.fit.lphi_err_m * a.error_scale;
  std::printf("%s: L_phi %.4g +- %.2g nm (truth %.4g), offset %.4g +- %.2g mT, usable %d\n",
              label.c_str(), a.fit.lphi_m * 1e9, err * 1e9, truth_m * 1e9,
              a.field_offset_t * 1e3, a.field_offset_err_t * 1e3, a.usable);
  EXPECT_NEAR(a.fit.lphi_m, truth_m, std::max(3.0 * err, 0.05 * truth_m)) << label;
}

}  // namespace

// The sweep of the issue: L_phi = 1 um, a 0.3 mT remanent field. Mirrored
// about the reading's zero it fitted 887 +- 7 nm with no flag; centred it
// must give 1 um within its errors.
TEST(SweepAnalysis, RemanentFieldIsCentredAway) {
  for (double lphi : {1e-6, 300e-9}) {
    for (double remanent : {0.3e-3, 1e-3, 2e-3}) {
      LegPlan plan;
      plan.lphi_m = lphi;
      plan.remanent_t = remanent;
      plan.noise_ohm = 0.2;
      if (lphi < 5e-7) {
        plan.max_field_t = 0.05;
        plan.min_field_t = -0.05;
        plan.rate_t_per_s = 1e-4;
      }
      const auto legs = both_legs(plan);
      const sw::Analysis a = sw::analyze(legs, sw::Options{});
      expect_length(a, lphi, fmt_label(lphi, remanent));
      EXPECT_NEAR(a.remanent_field_t, remanent, 4.0 * a.field_offset_err_t);
      EXPECT_TRUE(a.usable) << a.reasons.size();
      if (remanent > 0.2 * lphi::mc::characteristic_field_t(lphi)) {
        EXPECT_TRUE(a.has("field-offset"));
        EXPECT_NE(a.advice.find("the magnet holds a remanent field"), std::string::npos) << a.advice;
      }
    }
  }
  // Without centring (the old preparation about the reading's zero) the same
  // 0.3 mT sweep is biased low by more than its error: the test above is
  // not passing for want of a visible effect.
  LegPlan plan;
  plan.remanent_t = 0.3e-3;
  plan.noise_ohm = 0.2;
  const auto legs = both_legs(plan);
  std::vector<lphi::conductance::FieldPoint> raw;
  for (const auto& leg : legs)
    for (const auto& r : leg) raw.push_back({r.field_t, r.rsq_ohm});
  lphi::conductance::PreparedSweep prepared;
  ASSERT_TRUE(lphi::conductance::prepare_sweep(raw, prepared).ok);
  const auto old = lphi::fit::fit_sweep(prepared.points, lphi::fit::SweepFitOptions{});
  ASSERT_TRUE(old.ok);
  std::printf("uncentred: L_phi %.4g +- %.2g nm\n", old.lphi_m * 1e9, old.lphi_err_m * 1e9);
  EXPECT_LT(old.lphi_m, 1e-6 - 3.0 * old.lphi_err_m);
}

// Lag: a lock-in time constant of 0.3 s at 3 mT/min, and a field reading
// 1 s behind the magnet; each leg is centred on its own, the lag measured.
TEST(SweepAnalysis, LagIsMeasuredAndCorrected) {
  for (const auto& [tau, reading_lag] : {std::pair{0.3, 0.0}, std::pair{0.0, 1.0}}) {
    LegPlan plan;
    plan.remanent_t = 0.5e-3;
    plan.tau_s = tau;
    plan.reading_lag_s = reading_lag;
    plan.noise_ohm = 0.2;
    const auto legs = both_legs(plan);
    const sw::Analysis a = sw::analyze(legs, sw::Options{});
    expect_length(a, plan.lphi_m, tau > 0 ? "tau 0.3 s" : "reading lag 1 s");
    ASSERT_TRUE(std::isfinite(a.field_lag_s));
    EXPECT_NEAR(a.field_lag_s, tau - reading_lag,
                std::max(4.0 * a.field_lag_err_s, 0.05 * std::abs(tau - reading_lag)));
    EXPECT_NEAR(a.sweep_rate_t_per_s, plan.rate_t_per_s, 1e-9);
    if (tau > 0) {
      EXPECT_EQ(a.time_constant_s, tau);
      EXPECT_TRUE(std::isfinite(a.max_sweep_rate_t_per_s));
    }
  }
}

TEST(SweepAnalysis, SweptTooFastIsFlaggedWithTheRateThatWouldDo) {
  LegPlan plan;
  plan.tau_s = 3.0;  // r tau = 0.15 mT, about B_phi
  plan.noise_ohm = 0.2;
  const auto legs = both_legs(plan);
  const sw::Analysis a = sw::analyze(legs, sw::Options{});
  ASSERT_TRUE(a.fit.ok) << a.fit.error;
  EXPECT_TRUE(a.too_fast);
  EXPECT_FALSE(a.usable);
  EXPECT_TRUE(a.has("swept-too-fast"));
  // 0.1 B_phi / tau, B_phi from the fit.
  EXPECT_NEAR(a.max_sweep_rate_t_per_s, 0.1 * a.fit.b_phi_t / 3.0, 1e-12);
  EXPECT_NE(a.advice.find("slow the sweep to"), std::string::npos) << a.advice;
}

TEST(SweepAnalysis, HoleAcrossZeroIsNotFitted) {
  LegPlan plan;
  plan.max_field_t = 0.1;
  plan.min_field_t = -0.1;
  plan.noise_ohm = 0.2;
  std::vector<sw::Reading> leg;
  for (const sw::Reading& r : readings(plan))
    if (r.field_t <= -0.02 || r.field_t >= 0.04) leg.push_back(r);
  const std::vector<std::vector<sw::Reading>> legs{leg};
  const sw::Analysis a = sw::analyze(legs, sw::Options{});
  ASSERT_TRUE(a.ok) << a.error;
  EXPECT_FALSE(a.usable);
  EXPECT_FALSE(a.fitted);
  EXPECT_TRUE(a.has("hole-across-zero"));
  EXPECT_NE(a.advice.find("+40.0 mT"), std::string::npos) << a.advice;
  EXPECT_TRUE(std::isnan(a.rsq0_ohm));  // no R_sq(0) quoted from a hole
}

TEST(SweepAnalysis, FlatSweepSaysSo) {
  LegPlan plan;
  plan.alpha = 0.0;
  plan.noise_ohm = 0.5;
  const auto legs = both_legs(plan);
  const sw::Analysis a = sw::analyze(legs, sw::Options{});
  ASSERT_TRUE(a.ok);
  EXPECT_TRUE(a.flat);
  EXPECT_FALSE(a.fit.ok);
  EXPECT_FALSE(a.usable);
  EXPECT_TRUE(a.has("no-wl-signal"));
  EXPECT_NE(a.fit.error.find("no weak-localization signal above the noise"), std::string::npos);
}

TEST(SweepAnalysis, OneSidedSweepIsPreparedFromItsSide) {
  LegPlan plan;
  plan.min_field_t = 0.0;
  plan.max_field_t = 0.02;
  plan.n_points = 201;
  plan.noise_ohm = 0.1;
  const std::vector<std::vector<sw::Reading>> legs{readings(plan)};
  // Off by default: refused by the preparation, with its reason.
  const sw::Analysis refused = sw::analyze(legs, sw::Options{});
  EXPECT_FALSE(refused.fitted);
  EXPECT_TRUE(refused.has("not-prepared"));
  EXPECT_FALSE(refused.usable);
  sw::Options options;
  options.allow_one_sided = true;
  const sw::Analysis a = sw::analyze(legs, options);
  ASSERT_TRUE(a.ok) << a.error;
  EXPECT_TRUE(a.fitted) << a.fit.error;
  EXPECT_FALSE(a.prepared.symmetrized);
  EXPECT_TRUE(a.has("one-sided"));
  EXPECT_TRUE(a.has("field-offset-unknown"));
  ASSERT_TRUE(a.fit.ok) << a.fit.error;
  // Without an odd part the one side alone gives the length (noise only).
  EXPECT_NEAR(a.fit.lphi_m, plan.lphi_m, std::max(3.0 * a.fit.lphi_err_m, 0.05 * plan.lphi_m));
}

TEST(SweepAnalysis, SpikesAreDroppedAndCounted) {
  LegPlan plan;
  plan.remanent_t = 0.3e-3;
  plan.noise_ohm = 0.2;
  auto legs = both_legs(plan);
  legs[0][57].rsq_ohm += 40.0;   // 200 noise sigma
  legs[1][300].rsq_ohm -= 25.0;
  const sw::Analysis a = sw::analyze(legs, sw::Options{});
  EXPECT_EQ(a.n_spikes, 2u);
  EXPECT_EQ(a.legs[0].n_spikes, 1u);
  EXPECT_TRUE(a.has("spikes-dropped"));
  expect_length(a, plan.lphi_m, "two spikes");
  // A clean sweep loses nothing: the cusp is not a spike.
  const auto clean = both_legs(plan);
  EXPECT_EQ(sw::analyze(clean, sw::Options{}).n_spikes, 0u);
}

// A lock-in gain drifting by 1 %/hour, linear in time: on each leg it is odd
// in B about the centre and leaves the centre and the length alone.
TEST(SweepAnalysis, GainDriftDoesNotBiasTheLength) {
  LegPlan plan;
  plan.remanent_t = 1e-3;
  plan.noise_ohm = 0.2;
  plan.gain_drift_per_s = 0.01 / 3600.0;
  plan.t0_s = 3600.0;
  const auto legs = both_legs(plan);
  const sw::Analysis a = sw::analyze(legs, sw::Options{});
  expect_length(a, plan.lphi_m, "gain drift 1 %/hour");
  EXPECT_NEAR(a.remanent_field_t, 1e-3, 4.0 * a.field_offset_err_t);
}

TEST(SweepAnalysis, UnitsAreQuestioned) {
  LegPlan plan;
  plan.lphi_m = 300e-9;
  plan.max_field_t = 0.05;
  plan.min_field_t = -0.05;
  plan.rate_t_per_s = 1e-4;
  plan.noise_ohm = 0.2;
  auto legs = both_legs(plan);
  for (auto& leg : legs)
    for (auto& r : leg) r.field_t *= 1e3;  // a +-50 mT sweep's column in mT read as tesla
  const sw::Analysis a = sw::analyze(legs, sw::Options{});
  EXPECT_TRUE(a.units_suspect);
  EXPECT_FALSE(a.usable);
  EXPECT_NE(a.unit_hint.find("mT"), std::string::npos) << a.unit_hint;
}

TEST(SweepAnalysis, BadInputIsRefusedWithWhere) {
  LegPlan plan;
  auto legs = both_legs(plan);
  legs[1][4].rsq_ohm = -1.0;
  const sw::Analysis a = sw::analyze(legs, sw::Options{});
  EXPECT_FALSE(a.ok);
  EXPECT_NE(a.error.find("leg 2 reading 5"), std::string::npos) << a.error;
}

TEST(SweepAnalysis, UpThenDownSplitsAtTheReversal) {
  LegPlan plan;
  const auto legs = both_legs(plan);
  std::vector<sw::Reading> table = legs[0];
  table.insert(table.end(), legs[1].begin(), legs[1].end());
  const auto split = sw::split_at_reversals(table);
  ASSERT_EQ(split.size(), 2u);
  EXPECT_GT(split[0].back().field_t, 0.019);
  EXPECT_GT(split[0].size() + split[1].size(), table.size() - 2);
}

// conductance::prepare_sweep with a field offset is the same as preparing the
// shifted readings.
TEST(SweepAnalysis, PrepareWithOffsetShiftsTheFields) {
  LegPlan plan;
  plan.remanent_t = 1e-3;
  plan.noise_ohm = 0.2;
  std::vector<lphi::conductance::FieldPoint> raw, shifted;
  for (const auto& p : make_leg(plan)) {
    raw.push_back({p.field_t, p.value});
    shifted.push_back({p.field_t + 1e-3, p.value});
  }
  lphi::conductance::PreparedSweep a, b;
  lphi::conductance::PrepareOptions options;
  options.field_offset_t = -1e-3;
  ASSERT_TRUE(lphi::conductance::prepare_sweep(raw, options, a).ok);
  ASSERT_TRUE(lphi::conductance::prepare_sweep(shifted, b).ok);
  ASSERT_EQ(a.points.size(), b.points.size());
  for (std::size_t i = 0; i < a.points.size(); ++i) {
    EXPECT_NEAR(a.points[i].field_t, b.points[i].field_t, 1e-15);
    EXPECT_NEAR(a.points[i].delta_sigma_s, b.points[i].delta_sigma_s, 1e-15);
  }
  EXPECT_DOUBLE_EQ(a.field_offset_t, -1e-3);
}

namespace {

// The model hints reach the analysis: a film with strong spin-orbit
// scattering (HLN's symplectic limit, alpha = -1/2: Hikami, Larkin and
// Nagaoka, Prog. Theor. Phys. 63, 707 (1980)) fitted with hln2d is told to
// try hln2d-so, with both fits' chi2_red, in its reasons and its advice; the
// hint does not keep the sweep out. A weak-localization sweep gets none.
TEST(SweepAnalysis, AntilocalizationIsToldToTryTheSpinOrbitModel) {
  LegPlan plan;
  plan.alpha = -0.5;
  plan.noise_ohm = 0.01;
  sw::Options options;
  const auto legs = both_legs(plan);
  const sw::Analysis a = sw::analyze(legs, options);
  ASSERT_TRUE(a.ok) << a.error;
  ASSERT_TRUE(a.fit.ok) << a.fit.error;
  ASSERT_TRUE(a.has("model-hint-spin-orbit")) << a.advice;
  ASSERT_FALSE(a.hints.empty());
  EXPECT_EQ(a.hints.front().suggested, lphi::mc::Model::hln2d_so);
  EXPECT_NE(a.advice.find("hln2d-so"), std::string::npos) << a.advice;
  const nlohmann::json j = lphi::schema::sweep_analysis_json(a);
  ASSERT_EQ(j.at("hints").size(), a.hints.size());
  EXPECT_EQ(j.at("hints")[0].at("suggested_model"), "hln2d-so");

  LegPlan wl;
  wl.noise_ohm = 0.01;
  const sw::Analysis clean = sw::analyze(both_legs(wl), options);
  ASSERT_TRUE(clean.fit.ok) << clean.fit.error;
  EXPECT_TRUE(clean.hints.empty()) << clean.advice;
  EXPECT_TRUE(clean.usable) << clean.advice;
  EXPECT_GT(clean.runs_p, lphi::fit::kRunsPUnusable);
}

}  // namespace
