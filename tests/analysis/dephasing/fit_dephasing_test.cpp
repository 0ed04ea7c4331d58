// fit_dephasing: round trips on seeded synthetic L_phi(T) tables, the
// verdict's states, the error model, and refused input.
//
// The truths are chosen like a 2D electron gas (L_phi of a few micrometres
// at 20 mK, below 1 um at 1 K); point errors of 3% on L_phi are typical of a
// sweep fit (common practice). Over many seeds the z-scores
// (estimate - truth)/error of an unbiased estimator with correct errors have
// mean 0 and unit width; with N seeds the sample mean scatters by 1/sqrt(N)
// and the sample width by about 1/sqrt(2N), so the bands below are several of
// those scatters wide.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

#include "analysis/dephasing.hpp"
#include "tests/analysis/dephasing/synthetic_tables.hpp"

namespace {

using lphi::dephasing::DephasingOptions;
using lphi::dephasing::DephasingResult;
using lphi::dephasing::fit_dephasing;
using lphi::dephasing::LphiPoint;
using lphi::dephasing::State;
using lphi::testing::DephasingTruth;
using lphi::testing::log_spaced;
using lphi::testing::make_lphi_table;

using lphi::testing::ZStats;

// L_sat = 3 um with T_sat = 50 mK for p = 1: b = L_sat^-2 / T_sat.
DephasingTruth saturating_truth() {
  DephasingTruth t;
  t.lsat_m = 3e-6;
  t.p = 1.0;
  t.b = 1.0 / (t.lsat_m * t.lsat_m) / 0.05;
  return t;
}

TEST(FitDephasing, PurePowerLawP1) {
  DephasingTruth truth;
  truth.b = 2.2e12;  // L_phi = 0.67 um at 1 K, 4.8 um at 20 mK
  truth.p = 1.0;
  const auto table = make_lphi_table(truth, log_spaced(0.02, 1.0, 25), 0.03, 11);
  const DephasingResult r = fit_dephasing(table);
  ASSERT_TRUE(r.error.empty()) << r.error;
  EXPECT_EQ(r.state, State::power_law);
  EXPECT_TRUE(r.converged);
  ASSERT_TRUE(r.exponent_p && r.exponent_p_err);
  EXPECT_GT(*r.exponent_p_err, 0.0);
  EXPECT_LT(std::abs(*r.exponent_p - 1.0), 3.0 * *r.exponent_p_err);
  EXPECT_LT(std::abs(*r.prefactor_b / truth.b - 1.0), 3.0 * *r.prefactor_b_err / *r.prefactor_b);
  EXPECT_FALSE(r.t_sat_k.has_value());
  EXPECT_FALSE(r.lphi_sat_m.has_value());
  EXPECT_DOUBLE_EQ(*r.exponent_p, r.power_law.p);
}

TEST(FitDephasing, PowerLawCalibrationOverSeeds) {
  // With no saturation in the data the F-test at significance 0.01 should
  // call a saturation in about 1% of tables or fewer (fewer, because
  // L_sat^-2 >= 0 puts about half the tables on the boundary, F = 0). The
  // exponent's z-scores have unit width if the covariance is right.
  DephasingTruth truth;
  truth.b = 2.2e12;
  truth.p = 1.0;
  const auto temps = log_spaced(0.02, 1.0, 25);
  ZStats zp;
  int false_saturation = 0;
  const int seeds = 300;
  for (int s = 0; s < seeds; ++s) {
    const auto r = fit_dephasing(make_lphi_table(truth, temps, 0.03, 1000 + static_cast<unsigned>(s)));
    ASSERT_TRUE(r.error.empty());
    EXPECT_TRUE(r.converged) << "seed " << s;
    if (r.state != State::power_law) ++false_saturation;
    zp.add((r.power_law.p - truth.p) / r.power_law.p_err);
  }
  // Binomial(300, 0.01): mean 3, so 12 is far in the tail.
  EXPECT_LE(false_saturation, 12);
  EXPECT_LT(std::abs(zp.mean()), 0.25);
  EXPECT_GT(zp.width(), 0.85);
  EXPECT_LT(zp.width(), 1.15);
}

TEST(FitDephasing, QuasiOneDimensionalExponent) {
  // p = 2/3: the quasi-1D Nyquist exponent (AAK 1982).
  DephasingTruth truth;
  truth.b = 1.0e12;
  truth.p = 2.0 / 3.0;
  DephasingOptions o;
  o.dimension = 1;
  const auto r = fit_dephasing(make_lphi_table(truth, log_spaced(0.03, 3.0, 30), 0.02, 7), o);
  ASSERT_TRUE(r.error.empty()) << r.error;
  EXPECT_EQ(r.state, State::power_law);
  EXPECT_DOUBLE_EQ(r.expected_exponent, 2.0 / 3.0);
  ASSERT_TRUE(r.exponent_p && r.exponent_p_err);
  EXPECT_LT(std::abs(*r.exponent_p - 2.0 / 3.0), 3.0 * *r.exponent_p_err);
}

TEST(FitDephasing, SaturatedOneSeed) {
  const auto truth = saturating_truth();
  const auto r = fit_dephasing(make_lphi_table(truth, log_spaced(0.02, 1.0, 25), 0.03, 5));
  ASSERT_TRUE(r.error.empty()) << r.error;
  EXPECT_EQ(r.state, State::saturated);
  EXPECT_LT(r.p_value, 0.01);
  EXPECT_LT(r.aic_saturating, r.aic_power_law);
  ASSERT_TRUE(r.t_sat_k && r.t_sat_err_k && r.lphi_sat_m && r.lphi_sat_err_m);
  EXPECT_LT(std::abs(*r.t_sat_k - 0.05), 3.0 * *r.t_sat_err_k);
  EXPECT_LT(std::abs(*r.lphi_sat_m - truth.lsat_m), 3.0 * *r.lphi_sat_err_m);
  // Definition: T_sat is where L_sat^-2 = b T_sat^p.
  EXPECT_NEAR(std::pow(*r.lphi_sat_m, -2.0) / (*r.prefactor_b * std::pow(*r.t_sat_k, *r.exponent_p)),
              1.0, 1e-12);
}

TEST(FitDephasing, SaturatedZScoresOverSeeds) {
  // T_sat = 50 mK, T_min = 20 mK: the saturation term must be significant in
  // every table, and the errors on T_sat, L_sat and p must describe the
  // scatter. T_sat and L_sat are judged in their logarithms (error / value),
  // where the linear propagation of the covariance is accurate. With 3% point
  // errors T_sat is known to about 16%, so a fitted T_sat below
  // T_min / saturated_ratio = 40 mK (a 1.4 sigma low fluctuation, about 10% of
  // tables) makes the verdict "saturating"; the rest are "saturated".
  const auto truth = saturating_truth();
  const auto temps = log_spaced(0.02, 1.0, 25);
  ZStats zt, zl, zp;
  int saturated = 0, significant = 0;
  const int seeds = 300;
  for (int s = 0; s < seeds; ++s) {
    const auto r = fit_dephasing(make_lphi_table(truth, temps, 0.03, 5000 + static_cast<unsigned>(s)));
    ASSERT_TRUE(r.error.empty());
    EXPECT_TRUE(r.converged) << "seed " << s;
    if (r.state == State::saturated) ++saturated;
    if (r.state != State::saturated && r.state != State::saturating) continue;
    ++significant;
    ASSERT_TRUE(r.t_sat_k && r.t_sat_err_k && r.lphi_sat_m && r.lphi_sat_err_m);
    zt.add(std::log(*r.t_sat_k / 0.05) / (*r.t_sat_err_k / *r.t_sat_k));
    zl.add(std::log(*r.lphi_sat_m / truth.lsat_m) / (*r.lphi_sat_err_m / *r.lphi_sat_m));
    zp.add((*r.exponent_p - truth.p) / *r.exponent_p_err);
  }
  EXPECT_EQ(significant, seeds);
  // Binomial(300, 0.9): mean 270, sd 5.2.
  EXPECT_GE(saturated, 240);
  for (const ZStats* z : {&zt, &zl, &zp}) {
    EXPECT_LT(std::abs(z->mean()), 0.25);
    EXPECT_GT(z->width(), 0.85);
    EXPECT_LT(z->width(), 1.2);
  }
}

TEST(FitDephasing, NearSaturationIsSaturating) {
  // Lowest temperature 45 mK, just below T_sat = 50 mK but above
  // saturated_ratio * T_sat = 25 mK: the saturation term is seen (it is half
  // the rate at 45 mK) but the data do not reach deep into it.
  const auto truth = saturating_truth();
  const auto r = fit_dephasing(make_lphi_table(truth, log_spaced(0.045, 1.5, 30), 0.01, 3));
  ASSERT_TRUE(r.error.empty()) << r.error;
  EXPECT_EQ(r.state, State::saturating);
  ASSERT_TRUE(r.t_sat_k && r.t_sat_err_k);
  EXPECT_LT(std::abs(*r.t_sat_k - 0.05), 3.0 * *r.t_sat_err_k);
}

TEST(FitDephasing, TooFewPointsOrTooNarrowSpan) {
  DephasingTruth truth;
  truth.b = 2.2e12;
  // Four temperatures, default min_points = 5.
  auto r = fit_dephasing(make_lphi_table(truth, log_spaced(0.02, 1.0, 4), 0.03, 1));
  EXPECT_TRUE(r.error.empty());
  EXPECT_EQ(r.state, State::insufficient_data);
  EXPECT_FALSE(r.exponent_p.has_value());
  // Span 2.5 < 3.
  r = fit_dephasing(make_lphi_table(truth, log_spaced(0.4, 1.0, 20), 0.03, 1));
  EXPECT_EQ(r.state, State::insufficient_data);
  // Eight points but only four distinct temperatures.
  auto temps = log_spaced(0.02, 1.0, 4);
  temps.insert(temps.end(), temps.begin(), temps.end());
  r = fit_dephasing(make_lphi_table(truth, temps, 0.03, 1));
  EXPECT_EQ(r.state, State::insufficient_data);
  EXPECT_EQ(r.n_points, 8u);
  EXPECT_EQ(r.n_temperatures, 4u);
  // Nothing at all.
  r = fit_dephasing({});
  EXPECT_EQ(r.state, State::insufficient_data);
  EXPECT_TRUE(r.error.empty());
}

TEST(FitDephasing, RepeatedTemperaturesAreAllowed) {
  // Two sweeps at each temperature are two measurements: they are fitted, and
  // the verdict is the one the truth implies.
  const auto truth = saturating_truth();
  auto temps = log_spaced(0.02, 1.0, 15);
  temps.insert(temps.end(), temps.begin(), temps.end());
  const auto r = fit_dephasing(make_lphi_table(truth, temps, 0.03, 9));
  ASSERT_TRUE(r.error.empty()) << r.error;
  EXPECT_EQ(r.n_temperatures, 15u);
  EXPECT_EQ(r.state, State::saturated);
}

TEST(FitDephasing, UnknownErrorsUseScatter) {
  // Errors proportional to L_phi give equal relative weights in y, the same
  // weights the unknown-error rule uses. So the parameters must agree with
  // the known-error fit and the errors must be those errors times
  // sqrt(chi2/(n - 3)) (the documented scaling; an identity of least
  // squares). Tolerance: both fits converge to 1e-12 in parameters.
  const auto truth = saturating_truth();
  const auto known = make_lphi_table(truth, log_spaced(0.02, 1.0, 25), 0.03, 21);
  std::vector<LphiPoint> unknown = known;
  for (auto& pt : unknown) pt.lphi_err_m = 0.0;
  // Same relative error everywhere (the reported error is relative to the
  // true L_phi, which differs from the measured one): rebuild it exactly.
  std::vector<LphiPoint> proportional = known;
  for (auto& pt : proportional) pt.lphi_err_m = 0.03 * pt.lphi_m;
  const auto a = fit_dephasing(proportional);
  const auto b = fit_dephasing(unknown);
  ASSERT_TRUE(a.error.empty() && b.error.empty());
  EXPECT_TRUE(b.errors_from_scatter);
  ASSERT_EQ(a.state, State::saturated);
  ASSERT_EQ(b.state, State::saturated);
  EXPECT_NEAR(*b.t_sat_k / *a.t_sat_k, 1.0, 1e-6);
  EXPECT_NEAR(*b.exponent_p / *a.exponent_p, 1.0, 1e-6);
  const double scale = std::sqrt(a.chi2_saturating / (25.0 - 3.0));
  EXPECT_NEAR(*b.t_sat_err_k / (*a.t_sat_err_k * scale), 1.0, 1e-5);
  EXPECT_NEAR(*b.exponent_p_err / (*a.exponent_p_err * scale), 1.0, 1e-5);
  // The F statistic is a ratio of chi-squares: the same for any common scale.
  EXPECT_NEAR(b.f_statistic / a.f_statistic, 1.0, 1e-5);
}

TEST(FitDephasing, AakRatioAgainstItsOwnTruth) {
  // A table generated from the 2D AAK rate itself, L_phi^-2 = rate(T)/D with
  // D = 0.01 m^2/s and R_sq = 1 kohm, must give aak_ratio = 1 within its
  // error (the rate is exactly linear in T, so p = 1 is the truth).
  const double d = 0.01, rsq = 1000.0;
  DephasingTruth truth;
  truth.p = 1.0;
  truth.b = lphi::dephasing::aak_rate_2d_per_s(1.0, rsq) / d;
  DephasingOptions o;
  o.diffusion_m2s = d;
  o.sheet_resistance_ohm = rsq;
  const auto r = fit_dephasing(make_lphi_table(truth, log_spaced(0.02, 1.0, 25), 0.03, 17), o);
  ASSERT_TRUE(r.aak_ratio && r.aak_ratio_err && r.aak_rate_per_s_at_1k);
  EXPECT_LT(std::abs(*r.aak_ratio - 1.0), 3.0 * *r.aak_ratio_err);
  // Check value of analysis/PHYSICS.md, "Dephasing rate versus temperature".
  EXPECT_NEAR(*r.aak_rate_per_s_at_1k, 1.30e10, 0.005e10);
  // 1D AAK with a p = 2/3 truth built the same way.
  DephasingOptions o1;
  o1.dimension = 1;
  o1.diffusion_m2s = d;
  o1.resistance_per_length_ohm_m = 4e6;
  DephasingTruth t1;
  t1.p = 2.0 / 3.0;
  t1.b = lphi::dephasing::aak_rate_1d_per_s(1.0, 4e6, d) / d;
  const auto r1 = fit_dephasing(make_lphi_table(t1, log_spaced(0.02, 2.0, 25), 0.02, 19), o1);
  ASSERT_TRUE(r1.aak_ratio && r1.aak_ratio_err);
  EXPECT_LT(std::abs(*r1.aak_ratio - 1.0), 3.0 * *r1.aak_ratio_err);
  // A factor-of-two slower measured rate shows as a ratio of 1/2.
  DephasingTruth half = truth;
  half.b *= 0.5;
  const auto rh = fit_dephasing(make_lphi_table(half, log_spaced(0.02, 1.0, 25), 0.03, 17), o);
  EXPECT_LT(std::abs(*rh.aak_ratio - 0.5), 3.0 * *rh.aak_ratio_err);
}

TEST(FitDephasing, AakNeedsItsInputs) {
  DephasingTruth truth;
  truth.b = 2.2e12;
  const auto table = make_lphi_table(truth, log_spaced(0.02, 1.0, 25), 0.03, 2);
  DephasingOptions o;
  o.diffusion_m2s = 0.01;  // no sheet resistance
  auto r = fit_dephasing(table, o);
  EXPECT_FALSE(r.aak_ratio.has_value());
  EXPECT_FALSE(r.notes.empty());
  o.sheet_resistance_ohm = 20000.0;  // above R_K/2: no AAK form
  r = fit_dephasing(table, o);
  EXPECT_FALSE(r.aak_ratio.has_value());
  o.sheet_resistance_ohm = 1000.0;
  o.diffusion_m2s = -1.0;
  r = fit_dephasing(table, o);
  EXPECT_FALSE(r.aak_ratio.has_value());
  EXPECT_TRUE(r.error.empty());  // the L_phi(T) fit itself still stands
  EXPECT_EQ(r.state, State::power_law);
}

TEST(FitDephasing, RefusesBadInput) {
  DephasingTruth truth;
  truth.b = 2.2e12;
  const auto good = make_lphi_table(truth, log_spaced(0.02, 1.0, 10), 0.03, 3);
  const double nan = std::numeric_limits<double>::quiet_NaN();
  struct Case {
    const char* what;
    void (*spoil)(LphiPoint&, double);
    const char* expect;
  };
  const Case cases[] = {
      {"zero T", [](LphiPoint& p, double) { p.temperature_k = 0.0; }, "temperature_k"},
      {"negative T", [](LphiPoint& p, double) { p.temperature_k = -0.1; }, "temperature_k"},
      {"NaN T", [](LphiPoint& p, double n) { p.temperature_k = n; }, "temperature_k"},
      {"zero L", [](LphiPoint& p, double) { p.lphi_m = 0.0; }, "lphi_m"},
      {"negative L", [](LphiPoint& p, double) { p.lphi_m = -1e-6; }, "lphi_m"},
      {"NaN L", [](LphiPoint& p, double n) { p.lphi_m = n; }, "lphi_m"},
      {"infinite L", [](LphiPoint& p, double) { p.lphi_m = std::numeric_limits<double>::infinity(); }, "lphi_m"},
      {"L beyond double range", [](LphiPoint& p, double) { p.lphi_m = 1e-200; }, "lphi_m"},
      {"negative error", [](LphiPoint& p, double) { p.lphi_err_m = -1e-9; }, "lphi_err_m"},
      {"NaN error", [](LphiPoint& p, double n) { p.lphi_err_m = n; }, "lphi_err_m"},
      {"mixed errors", [](LphiPoint& p, double) { p.lphi_err_m = 0.0; }, "lphi_err_m"},
  };
  for (const auto& c : cases) {
    auto bad = good;
    c.spoil(bad[4], nan);
    const auto r = fit_dephasing(bad);
    EXPECT_EQ(r.state, State::insufficient_data) << c.what;
    EXPECT_NE(r.error.find(c.expect), std::string::npos) << c.what << ": " << r.error;
    if (std::string(c.what) != "mixed errors") {
      EXPECT_NE(r.error.find("point 4"), std::string::npos) << c.what << ": " << r.error;
    }
    EXPECT_FALSE(r.exponent_p.has_value()) << c.what;
  }
}

TEST(FitDephasing, RefusesBadOptions) {
  DephasingTruth truth;
  truth.b = 2.2e12;
  const auto table = make_lphi_table(truth, log_spaced(0.02, 1.0, 10), 0.03, 3);
  DephasingOptions o;
  o.dimension = 4;
  EXPECT_NE(fit_dephasing(table, o).error.find("dimension"), std::string::npos);
  o = {};
  o.min_points = 3;
  EXPECT_NE(fit_dephasing(table, o).error.find("min_points"), std::string::npos);
  o = {};
  o.significance = 1.5;
  EXPECT_NE(fit_dephasing(table, o).error.find("significance"), std::string::npos);
  o = {};
  o.saturated_ratio = 0.0;
  EXPECT_NE(fit_dephasing(table, o).error.find("saturated_ratio"), std::string::npos);
}

TEST(FitDephasing, FlatDataIsFullySaturated) {
  // L_phi independent of T within 1% errors: the power law cannot describe
  // it, no temperature dependence is resolved, and the verdict is saturated
  // with L_sat the common value and no T_sat (it lies above the data by an
  // unknown amount; a number there would be nonsense).
  std::vector<LphiPoint> table;
  lphi::testing::Gaussian g(4);
  for (double t : log_spaced(0.02, 1.0, 20)) table.push_back({t, 2e-6 * (1.0 + 0.01 * g.next()), 0.02e-6});
  const auto r = fit_dephasing(table);
  ASSERT_TRUE(r.error.empty());
  EXPECT_EQ(r.state, State::saturated);
  EXPECT_TRUE(r.temperature_independent);
  EXPECT_FALSE(r.t_sat_k.has_value());
  EXPECT_FALSE(r.exponent_p.has_value());
  ASSERT_TRUE(r.lphi_sat_m && r.lphi_sat_err_m);
  // The mean of 20 points with 1% errors is known to 1%/sqrt(20) = 0.22%.
  EXPECT_NEAR(*r.lphi_sat_err_m / *r.lphi_sat_m, 0.01 / std::sqrt(20.0), 2e-4);
  EXPECT_LT(std::abs(*r.lphi_sat_m - 2e-6), 3.0 * *r.lphi_sat_err_m);
}

TEST(FitDephasing, ClearTemperatureDependenceIsNotFlat) {
  DephasingTruth truth;
  truth.b = 2.2e12;
  const auto r = fit_dephasing(make_lphi_table(truth, log_spaced(0.02, 1.0, 25), 0.03, 11));
  EXPECT_FALSE(r.temperature_independent);
}

}  // namespace
