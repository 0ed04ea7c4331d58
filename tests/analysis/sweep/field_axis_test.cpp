// field_axis: the centre of a leg's cusp, remanence against lag, the rate
// criterion and coverage, against legs made from the exact HLN function with
// known faults (tests/analysis/sweep/leg_maker.hpp).
#include "analysis/field_axis.hpp"

#include <gtest/gtest.h>

#include <cmath>
#include <string>
#include <vector>

#include "analysis/magnetoconductance.hpp"
#include "tests/analysis/sweep/leg_maker.hpp"

namespace fa = lphi::field_axis;
using lphi::testing::expected_centre_t;
using lphi::testing::LegPlan;
using lphi::testing::make_leg;

namespace {

struct PullStats {
  double mean = 0.0, sd = 0.0;
  int n = 0;
};

// Monte-Carlo: (centre - truth) / error over many seeds. For an honest
// standard error the pulls have sd 1 (a known truth, so no outside reference
// is needed beyond the statistics of the normal distribution).
PullStats pulls(LegPlan plan, int seeds) {
  double s = 0, ss = 0;
  int n = 0;
  for (int seed = 1; seed <= seeds; ++seed) {
    plan.seed = static_cast<std::uint64_t>(seed) * 7919u + 11u;
    const fa::Centre c = fa::find_centre(make_leg(plan));
    EXPECT_TRUE(c.ok) << c.reason;
    if (!c.ok) continue;
    const double pull = (c.centre_t - expected_centre_t(plan)) / c.centre_err_t;
    s += pull;
    ss += pull * pull;
    ++n;
  }
  PullStats p;
  p.n = n;
  p.mean = s / n;
  p.sd = std::sqrt(ss / n - p.mean * p.mean);
  return p;
}

}  // namespace

TEST(FieldAxisCentre, FindsAKnownRemanentFieldWithoutNoise) {
  for (double remanent : {0.3e-3, 1e-3, 2e-3}) {
    LegPlan plan;
    plan.remanent_t = remanent;
    const fa::Centre c = fa::find_centre(make_leg(plan));
    ASSERT_TRUE(c.ok) << c.reason;
    // Noise-free: only the cubic interpolation's error remains, far below the
    // 0.1 mT field step.
    EXPECT_NEAR(c.centre_t, -remanent, 2e-6) << "remanent " << remanent;
    EXPECT_EQ(c.direction, 1.0);
    EXPECT_NEAR(c.rate_t_per_s, plan.rate_t_per_s, 1e-9);
  }
}

// The pull distribution of the centre's standard error, 200 seeds each, at
// L_phi = 1 um (B_phi = 0.16 mT, the cusp spans a few field steps) and at
// L_phi = 300 nm (B_phi = 1.8 mT) with Hall pickup and a 1 %/hour gain drift.
// With 200 pulls the sample sd of a unit normal has a standard error of
// 1/sqrt(400) = 0.05, so the 20 % band is four of those.
TEST(FieldAxisCentre, StandardErrorHasUnitPulls) {
  LegPlan sharp;
  sharp.remanent_t = 0.3e-3;
  sharp.noise_ohm = 0.5;
  const PullStats a = pulls(sharp, 200);
  std::printf("pulls at L_phi = 1 um: mean %.3f sd %.3f over %d\n", a.mean, a.sd, a.n);
  EXPECT_NEAR(a.sd, 1.0, 0.2);
  EXPECT_NEAR(a.mean, 0.0, 0.25);

  LegPlan broad;
  broad.lphi_m = 300e-9;
  broad.remanent_t = 1e-3;
  broad.max_field_t = 0.05;
  broad.min_field_t = -0.05;
  broad.rate_t_per_s = 1e-4;
  broad.noise_ohm = 0.3;
  broad.hall_ohm_per_t = 50.0;
  broad.gain_drift_per_s = 0.01 / 3600.0;
  broad.t0_s = 7200.0;
  const PullStats b = pulls(broad, 200);
  std::printf("pulls at L_phi = 300 nm: mean %.3f sd %.3f over %d\n", b.mean, b.sd, b.n);
  EXPECT_NEAR(b.sd, 1.0, 0.2);
  EXPECT_NEAR(b.mean, 0.0, 0.25);
}

TEST(FieldAxisCentre, OddPartsDoNotMoveTheCentre) {
  LegPlan plan;
  plan.remanent_t = 1e-3;
  plan.hall_ohm_per_t = 200.0;              // 4 ohm across the sweep
  plan.gain_drift_per_s = 0.01 / 3600.0;    // 1 %/hour
  plan.t0_s = 3600.0;
  const fa::Centre c = fa::find_centre(make_leg(plan));
  ASSERT_TRUE(c.ok) << c.reason;
  EXPECT_NEAR(c.centre_t, -1e-3, 2e-6);
}

TEST(FieldAxisCentre, RefusesWithAReason) {
  LegPlan one_sided;
  one_sided.min_field_t = 0.001;
  const fa::Centre a = fa::find_centre(make_leg(one_sided));
  EXPECT_FALSE(a.ok);
  EXPECT_NE(a.reason.find("does not cross zero field"), std::string::npos) << a.reason;
  EXPECT_TRUE(std::isnan(a.centre_t));

  LegPlan few;
  few.min_field_t = -0.0002;  // two readings below zero
  const fa::Centre b = fa::find_centre(make_leg(few));
  EXPECT_FALSE(b.ok);
  EXPECT_NE(b.reason.find("too few readings"), std::string::npos) << b.reason;

  // A flat sweep: no weak localization (alpha = 0), only noise.
  LegPlan flat;
  flat.alpha = 0.0;
  flat.noise_ohm = 0.5;
  const fa::Centre c = fa::find_centre(make_leg(flat));
  EXPECT_FALSE(c.ok);
  EXPECT_NE(c.reason.find("no curvature"), std::string::npos) << c.reason;
  EXPECT_TRUE(std::isnan(c.centre_t));
}

// Remanence and lag from an up and a down leg: a lock-in time constant of
// 0.3 s, and a field reading 1 s behind the magnet, on a 1 mT remanent field.
TEST(FieldAxisSplit, SeparatesRemanenceFromLag) {
  for (const auto& [tau, reading_lag] : {std::pair{0.3, 0.0}, std::pair{0.0, 1.0}}) {
    LegPlan up;
    up.remanent_t = 1e-3;
    up.tau_s = tau;
    up.reading_lag_s = reading_lag;
    up.noise_ohm = 0.2;
    LegPlan down = up;
    down.up = false;
    down.seed = 2;
    down.t0_s = 1000.0;
    const fa::Centre cu = fa::find_centre(make_leg(up));
    const fa::Centre cd = fa::find_centre(make_leg(down));
    ASSERT_TRUE(cu.ok && cd.ok) << cu.reason << cd.reason;
    EXPECT_EQ(cd.direction, -1.0);
    const fa::Split s = fa::split(cu, cd);
    EXPECT_NEAR(s.remanent_field_t, 1e-3, 4.0 * s.offset_err_t);
    EXPECT_NEAR(s.offset_t, -1e-3, 4.0 * s.offset_err_t);
    EXPECT_NEAR(s.rate_t_per_s, up.rate_t_per_s, 1e-9);
    const double delay = tau - reading_lag;
    // Besides noise, the filter's smoothing shifts a skewed curve slightly;
    // 4 standard errors or 5 % of the delay.
    EXPECT_NEAR(s.delay_s, delay, std::max(4.0 * s.delay_err_s, 0.05 * std::abs(delay)))
        << "tau " << tau << " lag " << reading_lag << " err " << s.delay_err_s;
    EXPECT_GT(s.delay_s * delay, 0.0);  // the sign tells lock-in lag from reading lag
  }
}

// The rate criterion's premise: a first-order filter at r tau = 0.1 B_phi,
// its shift removed, distorts the curve within 3 B_phi of its centre by at
// most about 1 % of the weak-localization signal there (analysis/PHYSICS.md, "The field
// axis"). Checked against the filter integrated exactly (leg_maker).
TEST(FieldAxisRate, TenthOfBphiDistortsByAtMostAboutOnePercent) {
  LegPlan plan;
  const double b_phi = lphi::mc::characteristic_field_t(plan.lphi_m);
  plan.n_points = 4001;
  plan.rate_t_per_s = 1e-4;
  plan.tau_s = 0.1 * b_phi / plan.rate_t_per_s;
  const auto filtered = make_leg(plan);
  const double shift = plan.rate_t_per_s * plan.tau_s;
  const double depth = lphi::testing::sheet_resistance(plan, 0.0) -
                       lphi::testing::sheet_resistance(plan, 3.0 * b_phi);
  double worst = 0.0;
  for (const auto& p : filtered) {
    if (std::abs(p.field_t - shift) > 3.0 * b_phi) continue;
    worst = std::max(worst, std::abs(p.value - lphi::testing::sheet_resistance(plan, p.field_t - shift)));
  }
  std::printf("distortion at r tau = 0.1 B_phi: %.3g %% of the signal within 3 B_phi\n",
              100.0 * worst / depth);
  EXPECT_GT(worst / depth, 0.001);
  EXPECT_LT(worst / depth, 0.03);

  const fa::RateCheck fast = fa::rate_check(plan.rate_t_per_s * 1.5, plan.tau_s, b_phi);
  EXPECT_TRUE(fast.known);
  EXPECT_TRUE(fast.too_fast);
  EXPECT_NEAR(fast.max_rate_t_per_s, plan.rate_t_per_s, 1e-12);
  EXPECT_FALSE(fa::rate_check(plan.rate_t_per_s * 0.9, plan.tau_s, b_phi).too_fast);
  EXPECT_FALSE(fa::rate_check(plan.rate_t_per_s, 0.0, b_phi).known);
}

TEST(FieldAxisCoverage, AHoleAcrossZeroIsNamedWithItsEnds) {
  std::vector<double> leg;
  for (int i = -100; i <= 100; ++i) {
    const double b = i * 0.5e-3;
    if (b > -0.02 && b < 0.04) continue;
    leg.push_back(b);
  }
  const std::vector<std::vector<double>> legs{leg};
  const fa::Coverage c = fa::coverage_before(legs);
  EXPECT_FALSE(c.ok);
  EXPECT_EQ(c.reason, "hole-across-zero");
  EXPECT_NE(c.sentence.find("between -20.0 and +40.0 mT"), std::string::npos) << c.sentence;
  EXPECT_NE(c.advice.find("-20.0 and +40.0 mT"), std::string::npos) << c.advice;
}

TEST(FieldAxisCoverage, TooFewReadingsWithinThreeBphi) {
  std::vector<double> leg;
  for (int i = -40; i <= 40; ++i) leg.push_back(i * 0.5e-3);  // 0.5 mT steps
  const std::vector<std::vector<double>> legs{leg};
  EXPECT_TRUE(fa::coverage_before(legs).ok);
  // B_phi = 0.05 mT: 3 B_phi = 0.15 mT holds only the reading at zero.
  const fa::Coverage c = fa::coverage_after(legs, 0.05e-3);
  EXPECT_FALSE(c.ok);
  EXPECT_EQ(c.reason, "cusp-not-resolved");
  EXPECT_EQ(c.n_near_zero, 1u);
  EXPECT_TRUE(fa::coverage_after(legs, 2e-3).ok);  // 3 B_phi = 6 mT: 25 readings
}
