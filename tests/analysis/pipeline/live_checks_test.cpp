// The per-update checks against the check values of analysis/PHYSICS.md
// ("Electron heating", "Dimensional regime"), CODATA and
// worked examples: thermal voltage, the wire electron temperature, the
// thermal length, regime boundaries, lock-in overload and quadrature, and
// fit quality on real sweep fits.
#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <numbers>
#include <vector>

#include "analysis/conductance.hpp"
#include "analysis/live_checks.hpp"
#include "analysis/synthetic.hpp"

namespace {

using lphi::checks::Regime;
using lphi::mc::Model;

// SI 2019 exact values (BIPM SI brochure, 9th edition), typed here so that
// the checks do not rest on analysis/constants.hpp.
constexpr double kE = 1.602176634e-19;
constexpr double kKb = 1.380649e-23;
constexpr double kH = 6.62607015e-34;

// ---- excitation heating --------------------------------------------------

TEST(LiveChecks, ThermalVoltageAt100mK) {
  // analysis/PHYSICS.md, "Electron heating": k_B T / e = 8.6 uV at 100 mK.
  // CODATA 2018 k_B/e = 8.617333262e-5 V/K (exact by the SI definitions)
  // gives 8.617333262e-6 V; the note quotes it to 2 figures.
  EXPECT_NEAR(lphi::checks::thermal_voltage_v(0.1), 8.617333262e-6, 1e-15);
  EXPECT_NEAR(lphi::checks::thermal_voltage_v(0.1), 8.6e-6, 0.05e-6);
  const auto c = lphi::checks::excitation_heating(8.617333262e-6, 0.1);
  ASSERT_TRUE(c.error.empty()) << c.error;
  EXPECT_NEAR(c.ratio, 1.0, 1e-10);  // the CODATA figure is rounded at 1e-10
  EXPECT_NEAR(c.thermal_voltage_v, kKb * 0.1 / kE, 1e-20);
}

TEST(LiveChecks, HeatingRiskAtTheRuleOfThumb) {
  // Rule of thumb (common practice; analysis/PHYSICS.md, "Electron heating"):
  // e V < k_B T. At 100 mK,
  // 4 uV is safe (r = 0.46), 10 uV is not (r = 1.16); sign ignored.
  EXPECT_FALSE(lphi::checks::excitation_heating(4e-6, 0.1).risk);
  EXPECT_NEAR(lphi::checks::excitation_heating(4e-6, 0.1).ratio, 4e-6 / (kKb * 0.1 / kE), 1e-14);
  EXPECT_TRUE(lphi::checks::excitation_heating(10e-6, 0.1).risk);
  EXPECT_TRUE(lphi::checks::excitation_heating(-10e-6, 0.1).risk);
  // The per-coherence-length form: L_phi / L = 1/10 scales the ratio.
  const auto c = lphi::checks::excitation_heating(10e-6, 0.1, 1e-6, 10e-6);
  ASSERT_TRUE(c.coherence_length_ratio.has_value());
  EXPECT_NEAR(*c.coherence_length_ratio, 0.1 * 10e-6 / (kKb * 0.1 / kE), 1e-14);
  EXPECT_FALSE(lphi::checks::excitation_heating(10e-6, 0.1).coherence_length_ratio.has_value());
}

TEST(LiveChecks, WireElectronTemperatureCheckValue) {
  // analysis/PHYSICS.md, "Electron heating" (derivation): e V = k_B T gives
  // T_e = 1.037 T; exactly
  // sqrt(1 + 3/(4 pi^2)) = 1.037299..., checked to the 4 figures quoted and
  // to rounding against the closed form.
  for (double t : {0.01, 0.1, 1.0}) {
    const double v = kKb * t / kE;
    const double te = lphi::checks::wire_electron_temperature_k(t, v);
    EXPECT_NEAR(te / t, 1.037, 5e-4);
    EXPECT_NEAR(te / t, std::sqrt(1.0 + 3.0 / (4.0 * std::numbers::pi * std::numbers::pi)), 1e-14);
    EXPECT_NEAR(lphi::checks::excitation_heating(v, t).wire_electron_temperature_k, te, 1e-15);
  }
  // No excitation: T_e = T exactly. Large V: T_e -> (sqrt(3)/(2 pi)) e V / k_B,
  // the bath no longer matters; at r = e V / k_B T = 1000 the ratio to that
  // limit is sqrt(1 + (4 pi^2/3)/r^2) = 1 + 6.58e-6 (to 1e-10, next term).
  EXPECT_EQ(lphi::checks::wire_electron_temperature_k(0.05, 0.0), 0.05);
  const double v = 1000.0 * kKb * 0.01 / kE;
  const double pi2 = std::numbers::pi * std::numbers::pi;
  EXPECT_NEAR(lphi::checks::wire_electron_temperature_k(0.01, v) /
                      (std::sqrt(3.0) / (2.0 * std::numbers::pi) * kE * v / kKb) -
                  1.0,
              2.0 * pi2 / 3.0 / 1e6, 1e-10);
  EXPECT_TRUE(std::isnan(lphi::checks::wire_electron_temperature_k(0.0, 1e-6)));
}

TEST(LiveChecks, HeatingRefusesBadInput) {
  EXPECT_NE(lphi::checks::excitation_heating(1e-6, 0.0).error.find("temperature_k"),
            std::string::npos);
  EXPECT_NE(lphi::checks::excitation_heating(std::nan(""), 0.1).error.find("sample_voltage_v"),
            std::string::npos);
  EXPECT_NE(lphi::checks::excitation_heating(1e-6, 0.1, -1.0).error.find("lphi_m"),
            std::string::npos);
  EXPECT_FALSE(lphi::checks::excitation_heating(1e-3, 0.0).risk) << "no flag on refused input";
}

// ---- dimensional regime -------------------------------------------------

TEST(LiveChecks, ThermalLength) {
  // L_T = sqrt(hbar D / (k_B T)) with hbar = h/(2 pi) from the exact h:
  // D = 0.01 m^2/s, T = 1 K gives sqrt(0.01 * 7.6382e-12 m^2) = 276.4 nm
  // (hbar/k_B = 7.638232e-12 K s, CODATA 2018). Scales as T^-1/2.
  const double expected = std::sqrt(kH / (2.0 * std::numbers::pi) * 0.01 / kKb);
  EXPECT_NEAR(lphi::checks::thermal_length_m(0.01, 1.0), expected, 1e-21);
  EXPECT_NEAR(lphi::checks::thermal_length_m(0.01, 1.0), 276.37e-9, 0.01e-9);
  EXPECT_NEAR(lphi::checks::thermal_length_m(0.01, 0.01), 10.0 * expected, 1e-20);
  EXPECT_TRUE(std::isnan(lphi::checks::thermal_length_m(0.0, 1.0)));
}

TEST(LiveChecks, RegimeBoundaries) {
  // analysis/PHYSICS.md, "Dimensional regime": t << L_phi << w is 2D,
  // w, t << L_phi is quasi-1D, t >> L_phi is 3D; "<<" as a factor margin = 3 (common
  // practice). The boundary is inclusive: margin * a <= b.
  using lphi::checks::classify;
  // A 10 nm film, 100 um wide.
  EXPECT_EQ(classify(1e-6, 100e-6, 10e-9, 3.0), Regime::two_d);
  EXPECT_EQ(classify(40e-6, 100e-6, 10e-9, 3.0), Regime::crossover);  // L_phi near w
  EXPECT_EQ(classify(20e-9, 100e-6, 10e-9, 3.0), Regime::crossover);  // L_phi near t
  // A wire 1 um wide: quasi-1D once L_phi >= 3 um.
  EXPECT_EQ(classify(3.1e-6, 1e-6, 10e-9, 3.0), Regime::quasi_1d);
  EXPECT_EQ(classify(2.9e-6, 1e-6, 10e-9, 3.0), Regime::crossover);
  // A thick film, 1 um: 3D while L_phi <= 333 nm.
  EXPECT_EQ(classify(0.3e-6, 1e-3, 1e-6, 3.0), Regime::three_d);
  EXPECT_EQ(classify(0.4e-6, 1e-3, 1e-6, 3.0), Regime::crossover);
  // Inclusive boundary with exactly representable numbers (powers of 2).
  EXPECT_EQ(classify(0.25, 1.0, 0.0, 4.0), Regime::two_d);
  EXPECT_EQ(classify(4.0, 1.0, 0.0, 4.0), Regime::quasi_1d);
  EXPECT_EQ(classify(0.25, 1e9, 1.0, 4.0), Regime::three_d);
  // Unknown geometry (0): wide and thin, so 2D.
  EXPECT_EQ(classify(1e-6, 0.0, 0.0, 3.0), Regime::two_d);

  EXPECT_EQ(lphi::checks::regime_name(Regime::two_d), "2d");
  EXPECT_EQ(lphi::checks::regime_name(Regime::quasi_1d), "quasi-1d");
  EXPECT_EQ(lphi::checks::regime_name(Regime::three_d), "3d");
  EXPECT_EQ(lphi::checks::regime_name(Regime::crossover), "crossover");
}

TEST(LiveChecks, RegimeAgainstTheModelAndTheThermalLength) {
  // A 100 nm wide wire fitted with wire1d at L_phi = 1 um: consistent; the
  // same numbers fitted with hln2d are not. With D = 0.01 m^2/s at 1 K,
  // L_T = 276 nm is also quasi-1D against w = 100 nm? 3 * 100 nm = 300 nm >
  // 276 nm: a crossover.
  auto c = lphi::checks::dimensional_regime(1e-6, 100e-9, 10e-9, Model::wire1d, 0.01, 1.0);
  ASSERT_TRUE(c.error.empty()) << c.error;
  EXPECT_EQ(c.regime, Regime::quasi_1d);
  EXPECT_TRUE(c.model_consistent);
  ASSERT_TRUE(c.thermal_length_m.has_value());
  EXPECT_NEAR(*c.thermal_length_m, 276.37e-9, 0.01e-9);
  ASSERT_TRUE(c.interaction_regime.has_value());
  EXPECT_EQ(*c.interaction_regime, Regime::crossover);
  // At 100 mK, L_T = 874 nm >= 300 nm: quasi-1D too.
  c = lphi::checks::dimensional_regime(1e-6, 100e-9, 10e-9, Model::wire1d, 0.01, 0.1);
  EXPECT_EQ(*c.interaction_regime, Regime::quasi_1d);

  c = lphi::checks::dimensional_regime(1e-6, 100e-9, 10e-9, Model::hln2d);
  EXPECT_FALSE(c.model_consistent);
  EXPECT_FALSE(c.thermal_length_m.has_value());
  c = lphi::checks::dimensional_regime(0.2e-6, 1e-3, 1e-6, Model::kawabata3d);
  EXPECT_EQ(c.regime, Regime::three_d);
  EXPECT_TRUE(c.model_consistent);

  EXPECT_NE(lphi::checks::dimensional_regime(0.0, 1e-6, 0.0, Model::hln2d).error.find("lphi_m"),
            std::string::npos);
  EXPECT_NE(lphi::checks::dimensional_regime(1e-6, -1.0, 0.0, Model::hln2d).error.find("width_m"),
            std::string::npos);
  lphi::checks::RegimeOptions o;
  o.margin = 0.5;
  EXPECT_NE(lphi::checks::dimensional_regime(1e-6, 0, 0, Model::hln2d, 0, 0, o).error.find("margin"),
            std::string::npos);
}

// ---- lock-in ---------------------------------------------------------------

TEST(LiveChecks, LockinOverloadAndQuadrature) {
  // Overload at or above the range, on either channel, or by the flag.
  EXPECT_FALSE(lphi::checks::lockin_reading(0.99e-3, 0.0, 1e-3, false).overload);
  EXPECT_TRUE(lphi::checks::lockin_reading(1e-3, 0.0, 1e-3, false).overload);
  EXPECT_TRUE(lphi::checks::lockin_reading(-1.2e-3, 0.0, 1e-3, false).overload);
  EXPECT_TRUE(lphi::checks::lockin_reading(1e-4, 1e-3, 1e-3, false).overload);
  EXPECT_TRUE(lphi::checks::lockin_reading(1e-4, 0.0, 1e-3, true).overload);
  EXPECT_FALSE(lphi::checks::lockin_reading(5.0, 0.0, 0.0, false).overload) << "range unknown";

  // |Y/X|: 2e-6 / 1e-5 = 0.2 is above the default 0.1; 0.05 is not.
  auto c = lphi::checks::lockin_reading(1e-5, -2e-6, 1e-3, false);
  EXPECT_NEAR(c.quadrature_ratio, 0.2, 1e-15);
  EXPECT_TRUE(c.large_quadrature);
  c = lphi::checks::lockin_reading(-1e-5, 5e-7, 1e-3, false);
  EXPECT_NEAR(c.quadrature_ratio, 0.05, 1e-15);
  EXPECT_FALSE(c.large_quadrature);
  EXPECT_EQ(lphi::checks::lockin_reading(0.0, 1e-7, 1e-3, false).quadrature_ratio,
            std::numeric_limits<double>::infinity());
  EXPECT_EQ(lphi::checks::lockin_reading(0.0, 0.0, 1e-3, false).quadrature_ratio, 0.0);
  EXPECT_NE(lphi::checks::lockin_reading(std::nan(""), 0.0, 1e-3, false).error.find("x_v"),
            std::string::npos);
}

// ---- fit quality: on real fits of synthetic sweeps -------------------------

struct FittedSweep {
  lphi::fit::SweepFitResult fit;
  std::vector<lphi::conductance::DeltaSigmaPoint> points;
};

// HLN sweep, L_phi = 200 nm, R_sq = 1 kohm, noise 0.05 ohm on R_sq, fitted
// with point errors err_s (0: none).
FittedSweep fitted(double err_s) {
  lphi::synthetic::SweepTruth truth;
  lphi::synthetic::SweepPlan plan;
  plan.max_field_t = 0.1;
  plan.n_points = 401;
  plan.noise_rsq_ohm = 0.05;
  plan.seed = 9;
  std::vector<lphi::conductance::FieldPoint> raw;
  for (const auto& p : lphi::synthetic::make_sweep(truth, plan)) raw.push_back({p.field_t, p.rsq_ohm});
  lphi::conductance::PreparedSweep prepared;
  EXPECT_TRUE(lphi::conductance::prepare_sweep(raw, prepared).ok);
  FittedSweep f;
  f.points = prepared.points;
  std::vector<double> errs;
  if (err_s > 0.0) errs.assign(prepared.points.size(), err_s);
  f.fit = lphi::fit::fit_sweep(prepared.points, lphi::fit::SweepFitOptions{}, errs);
  return f;
}

TEST(LiveChecks, FitQualityOnAGoodFit) {
  // Symmetrizing averages two readings, so a point's error is
  // 0.05 ohm / sqrt(2) / R_sq^2 = 3.54e-8 S; with that error chi2_red is
  // near 1, below the limit 3.
  const auto f = fitted(0.05 / std::sqrt(2.0) / 1e6);
  ASSERT_TRUE(f.fit.ok) << f.fit.error;
  const auto q = lphi::checks::fit_quality(f.fit, true);
  EXPECT_FALSE(q.failed);
  EXPECT_FALSE(q.not_converged);
  EXPECT_FALSE(q.chi2_above_limit);
  EXPECT_NEAR(q.chi2_red, 1.0, 0.3);
  EXPECT_TRUE(q.usable_for_dephasing);
}

TEST(LiveChecks, FitQualityFlagsUnderstatedErrors) {
  // Errors 10x too small: chi2_red ~ 100, above the limit. Without point
  // errors the same chi2_red is not judged (it is then in (e^2/(pi h))^2).
  const auto f = fitted(0.05 / std::sqrt(2.0) / 1e6 / 10.0);
  ASSERT_TRUE(f.fit.ok) << f.fit.error;
  const auto q = lphi::checks::fit_quality(f.fit, true);
  EXPECT_TRUE(q.chi2_above_limit);
  EXPECT_GT(q.chi2_red, 50.0);
  EXPECT_FALSE(q.usable_for_dephasing);
  ASSERT_FALSE(q.reasons.empty());
  EXPECT_EQ(q.reasons.front(), "chi2-red-above-limit");
  EXPECT_FALSE(lphi::checks::fit_quality(f.fit, false).chi2_above_limit);
}

TEST(LiveChecks, FitQualityOnAFailedFitAndOnFlags) {
  const auto failed = lphi::fit::fit_sweep({}, lphi::fit::SweepFitOptions{});
  ASSERT_FALSE(failed.ok);
  const auto q = lphi::checks::fit_quality(failed, false);
  EXPECT_TRUE(q.failed);
  EXPECT_FALSE(q.usable_for_dephasing);
  ASSERT_EQ(q.reasons.size(), 1u);
  EXPECT_EQ(q.reasons[0].rfind("fit-failed: ", 0), 0u) << q.reasons[0];

  // A window forced below B_phi: the fit flags window-too-narrow, which
  // makes L_phi unusable for L_phi(T).
  auto f = fitted(0.0);
  lphi::fit::SweepFitOptions narrow;
  narrow.window_t = 0.2 * f.fit.b_phi_t;
  const auto r = lphi::fit::fit_sweep(f.points, narrow);
  if (r.ok && r.has(lphi::fit::Flag::window_too_narrow)) {
    const auto qn = lphi::checks::fit_quality(r, false);
    EXPECT_FALSE(qn.usable_for_dephasing);
    bool named = false;
    for (const auto& s : qn.reasons) named = named || s == "window-too-narrow";
    EXPECT_TRUE(named);
  } else {
    // Too few points in so narrow a window is a refusal instead: also unusable.
    EXPECT_FALSE(lphi::checks::fit_quality(r, false).usable_for_dephasing);
  }
}

}  // namespace
