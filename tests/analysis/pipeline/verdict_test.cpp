// The combined verdict: its truth table from hand-built results, and three
// physical scenarios built from the published forms (analysis/PHYSICS.md,
// "Zero-field temperature dependence", Lee and Ramakrishnan, Rev. Mod. Phys.
// 57, 287 (1985); and "Electron heating"), run through the real L_phi(T) fit and the real
// zero-field thermometry:
//   intrinsic:  T_e = T, L_phi^-2 = L_sat^-2 + b T,
//   heating:    T_e = sqrt(T^2 + T_f^2), L_phi^-2 = b T_e (no intrinsic term),
//   power law:  T_e = T, L_phi^-2 = b T,
// and sigma(0) = sigma_1 + (e^2/(pi h)) [(1 - 3F/4) ln T_e - alpha ln L_phi^2]
// with F = 0.5 (interaction slope 0.625) and alpha = 1.
// Noise: 3% on L_phi (a typical sweep fit's error, common practice) and
// 0.02 e^2/(pi h) on sigma(0) (2.5e-7 S, a 1 kohm film measured at 1e-4).
#include <gtest/gtest.h>

#include <cmath>
#include <vector>

#include "analysis/constants.hpp"
#include "analysis/synthetic.hpp"
#include "analysis/verdict.hpp"

namespace {

using lphi::dephasing::DephasingResult;
using lphi::dephasing::LphiPoint;
using lphi::dephasing::State;
using lphi::thermometry::ZeroFieldPoint;
using lphi::verdict::Cause;
using lphi::verdict::ElectronThermometer;
using lphi::verdict::VerdictOptions;

// ---- truth table -------------------------------------------------------------

DephasingResult saturated(double t_sat_k) {
  DephasingResult d;
  d.state = State::saturated;
  d.t_sat_k = t_sat_k;
  d.t_sat_err_k = 0.1 * t_sat_k;
  d.lphi_sat_m = 3e-6;
  d.exponent_p = 1.0;
  d.prefactor_b = 1.0 / (9e-12 * t_sat_k);
  d.reference_temperature_k = 0.14;
  return d;
}

// A thermometer that follows ln T (departs = false) or flattens at t_floor.
ElectronThermometer thermometer(bool departs, double t_floor_k, double t_min_k,
                                double kappa = 0.625, double kappa_err = 0.02) {
  ElectronThermometer th;
  th.result.sufficient = true;
  th.result.departs = departs;
  if (departs && t_floor_k > 0.0) th.result.floor_temperature_k = t_floor_k;
  th.result.slope_kappa = kappa;
  th.result.slope_kappa_err = kappa_err;
  th.result.p_value = departs ? 1e-6 : 0.5;
  th.weak_localization_removed = true;
  th.t_min_k = t_min_k;
  th.t_max_k = 1.0;
  return th;
}

TEST(VerdictRules, IntrinsicWhenCoolingWellBelowTsat) {
  const auto v = lphi::verdict::decide(saturated(0.1), thermometer(false, 0, 0.02));
  ASSERT_TRUE(v.error.empty());
  EXPECT_EQ(v.state, State::saturated);
  ASSERT_TRUE(v.electrons_cooling.has_value());
  EXPECT_TRUE(*v.electrons_cooling);
  ASSERT_TRUE(v.likely_cause.has_value());
  EXPECT_EQ(*v.likely_cause, Cause::intrinsic);
  EXPECT_EQ(v.evidence.t_sat_k, 0.1);
  EXPECT_EQ(v.evidence.thermometer_t_min_k, 0.02);
  EXPECT_FALSE(v.notes.empty());
}

TEST(VerdictRules, IntrinsicNeedsDataWellBelowTsat) {
  // Cooling seen down to 80 mK only, T_sat = 100 mK: 0.8 > 0.5, unknown.
  const auto v = lphi::verdict::decide(saturated(0.1), thermometer(false, 0, 0.08));
  EXPECT_TRUE(*v.electrons_cooling);
  EXPECT_EQ(*v.likely_cause, Cause::unknown);
  // Exactly at the ratio counts (0.05 <= 0.5 * 0.1).
  EXPECT_EQ(*lphi::verdict::decide(saturated(0.1), thermometer(false, 0, 0.05)).likely_cause,
            Cause::intrinsic);
}

TEST(VerdictRules, HeatingWhenTheFloorMatchesTsat) {
  // Default factor 3: T_floor / T_sat in [1/3, 3].
  for (double floor : {0.034, 0.1, 0.29}) {
    const auto v = lphi::verdict::decide(saturated(0.1), thermometer(true, floor, 0.02));
    ASSERT_TRUE(v.electrons_cooling.has_value());
    EXPECT_FALSE(*v.electrons_cooling);
    EXPECT_EQ(*v.likely_cause, Cause::electron_heating_or_noise) << floor;
    EXPECT_NEAR(*v.evidence.floor_over_sat, floor / 0.1, 1e-12);
  }
  // A factor of more than 3 either way: not where L_phi saturates.
  for (double floor : {0.03, 0.31, 1.0}) {
    const auto v = lphi::verdict::decide(saturated(0.1), thermometer(true, floor, 0.02));
    EXPECT_FALSE(*v.electrons_cooling);
    EXPECT_EQ(*v.likely_cause, Cause::unknown) << floor;
  }
}

TEST(VerdictRules, InsufficientThermometry) {
  ElectronThermometer th;  // sufficient = false
  const auto v = lphi::verdict::decide(saturated(0.1), th);
  EXPECT_FALSE(v.electrons_cooling.has_value());
  ASSERT_TRUE(v.likely_cause.has_value());
  EXPECT_EQ(*v.likely_cause, Cause::unknown);
  th.result.sufficient = true;
  th.result.error = "point 2: temperature_k must be finite and > 0";
  EXPECT_FALSE(lphi::verdict::decide(saturated(0.1), th).electrons_cooling.has_value());
}

TEST(VerdictRules, UnresolvedSlopeIsNoThermometer) {
  // kappa 0.05 +- 0.03: under 3 sigma, sigma(0) cannot tell cooling.
  const auto v = lphi::verdict::decide(saturated(0.1), thermometer(false, 0, 0.02, 0.05, 0.03));
  EXPECT_FALSE(v.electrons_cooling.has_value());
  EXPECT_EQ(*v.likely_cause, Cause::unknown);
}

TEST(VerdictRules, RawDepartureWithoutAModelIsUnknown) {
  auto th = thermometer(true, 0.1, 0.02);
  th.weak_localization_removed = false;
  const auto v = lphi::verdict::decide(saturated(0.1), th);
  EXPECT_FALSE(v.electrons_cooling.has_value());
  EXPECT_EQ(*v.likely_cause, Cause::unknown);
  // Following ln T raw is enough to say the electrons cool.
  th = thermometer(false, 0, 0.02);
  th.weak_localization_removed = false;
  EXPECT_TRUE(*lphi::verdict::decide(saturated(0.1), th).electrons_cooling);
}

TEST(VerdictRules, NoCauseWithoutSaturation) {
  DephasingResult d;
  d.state = State::power_law;
  d.exponent_p = 1.0;
  d.prefactor_b = 1e12;
  auto v = lphi::verdict::decide(d, thermometer(false, 0, 0.02));
  EXPECT_TRUE(*v.electrons_cooling);
  EXPECT_FALSE(v.likely_cause.has_value());
  // Electrons not cooling is still reported without saturation.
  v = lphi::verdict::decide(d, thermometer(true, 0.05, 0.02));
  EXPECT_FALSE(*v.electrons_cooling);
  EXPECT_FALSE(v.likely_cause.has_value());
  d.state = State::insufficient_data;
  EXPECT_FALSE(lphi::verdict::decide(d, thermometer(false, 0, 0.02)).likely_cause.has_value());
}

TEST(VerdictRules, FlatLphi) {
  // L_phi flat over the whole range (no T_sat): heating if sigma is flat too,
  // intrinsic if the electrons are seen to cool.
  DephasingResult d;
  d.state = State::saturated;
  d.temperature_independent = true;
  d.lphi_sat_m = 2e-6;
  EXPECT_EQ(*lphi::verdict::decide(d, thermometer(true, 0.0, 0.02)).likely_cause,
            Cause::electron_heating_or_noise);
  EXPECT_EQ(*lphi::verdict::decide(d, thermometer(false, 0.0, 0.02)).likely_cause,
            Cause::intrinsic);
  // Flattening at a temperature inside the range while L_phi is flat
  // throughout: contradictory, unknown.
  EXPECT_EQ(*lphi::verdict::decide(d, thermometer(true, 0.1, 0.02)).likely_cause, Cause::unknown);
}

TEST(VerdictRules, OtherDimensionsAreNotChecked) {
  VerdictOptions o;
  o.dimension = 1;
  const auto v = lphi::verdict::decide(saturated(0.1), thermometer(false, 0, 0.02), o);
  EXPECT_FALSE(v.electrons_cooling.has_value());
  EXPECT_EQ(*v.likely_cause, Cause::unknown);
}

TEST(VerdictRules, BadOptionsAreRefused) {
  VerdictOptions o;
  o.heating_match_factor = 0.5;
  const auto v = lphi::verdict::decide(saturated(0.1), thermometer(false, 0, 0.02), o);
  EXPECT_NE(v.error.find("heating_match_factor"), std::string::npos);
  EXPECT_FALSE(v.electrons_cooling.has_value());
  EXPECT_FALSE(v.likely_cause.has_value());
  EXPECT_EQ(lphi::verdict::cause_name(Cause::electron_heating_or_noise), "electron-heating-or-noise");
  EXPECT_EQ(lphi::verdict::cause_name(Cause::intrinsic), "intrinsic");
  EXPECT_EQ(lphi::verdict::cause_name(Cause::unknown), "unknown");
}

// ---- the weak-localization part --------------------------------------------

TEST(VerdictModel, InteractionPartRemovesExactlyTheWeakLocalizationTerm) {
  // Noise-free: sigma = s1 + u [kappa_ee ln T - alpha ln L^2] with L from the
  // model itself; sigma_int must be s1 + u [kappa_ee ln T - alpha ln L_ref^2]
  // to rounding, i.e. exactly kappa_ee per unit ln T.
  const auto d = saturated(0.1);
  const double u = lphi::si::wl_conductance_s;
  std::vector<ZeroFieldPoint> pts;
  for (double t : {0.02, 0.05, 0.1, 0.2, 0.5, 1.0}) {
    const double l = *lphi::verdict::model_lphi_m(d, t);
    pts.push_back({t, 1e-3 + u * (0.625 * std::log(t) - std::log(l * l)), 0.0});
  }
  const auto inter = lphi::verdict::interaction_part(pts, d, 1.0);
  ASSERT_EQ(inter.size(), pts.size());
  for (std::size_t i = 1; i < inter.size(); ++i) {
    const double slope = (inter[i].sigma_s - inter[0].sigma_s) / u /
                         std::log(inter[i].temperature_k / inter[0].temperature_k);
    EXPECT_NEAR(slope, 0.625, 1e-9);
  }
  // The model: L^-2 = L_sat^-2 + b T^p, here 1/9e-12 (1 + T/T_sat).
  EXPECT_NEAR(*lphi::verdict::model_lphi_m(d, 0.1), 3e-6 / std::sqrt(2.0), 1e-18);
  DephasingResult none;
  EXPECT_FALSE(lphi::verdict::model_lphi_m(none, 0.1).has_value());
  EXPECT_TRUE(lphi::verdict::interaction_part(pts, none, 1.0).empty());
}

// ---- physical scenarios --------------------------------------------------------

enum class Scenario { intrinsic, heating, power_law };

struct Tables {
  std::vector<LphiPoint> lphi;
  std::vector<ZeroFieldPoint> sigma0;
};

constexpr double kTsat = 0.1;     // K, intrinsic T_sat and the heating floor
constexpr double kLsat = 3e-6;    // m
constexpr double kKappaEe = 0.625;

Tables make_tables(Scenario s, std::uint64_t seed) {
  lphi::synthetic::NormalSource noise(seed);
  const double b = 1.0 / (kLsat * kLsat * kTsat);  // L^-2 = b T at T_sat equals L_sat^-2
  const double u = lphi::si::wl_conductance_s;
  Tables out;
  const std::size_t n = 16;
  for (std::size_t i = 0; i < n; ++i) {
    const double t = 0.02 * std::pow(1.0 / 0.02, static_cast<double>(i) / (n - 1));
    const double te = s == Scenario::heating ? std::hypot(t, kTsat) : t;
    double inv2 = b * te;
    if (s == Scenario::intrinsic) inv2 += 1.0 / (kLsat * kLsat);
    const double l = 1.0 / std::sqrt(inv2);
    out.lphi.push_back({t, l * (1.0 + 0.03 * noise.next()), 0.03 * l});
    const double sigma = 1e-3 + u * (kKappaEe * std::log(te) - std::log(l * l * 1e12) + 0.02 * noise.next());
    out.sigma0.push_back({t, sigma, 0.02 * u});
  }
  return out;
}

TEST(VerdictScenarios, IntrinsicSaturation) {
  int raw_departs = 0;
  for (std::uint64_t seed = 1; seed <= 10; ++seed) {
    SCOPED_TRACE(seed);
    const auto tab = make_tables(Scenario::intrinsic, seed);
    const auto d = lphi::dephasing::fit_dephasing(tab.lphi);
    ASSERT_TRUE(d.error.empty()) << d.error;
    ASSERT_EQ(d.state, State::saturated);
    const auto th = lphi::verdict::electron_thermometer(tab.sigma0, d);
    EXPECT_TRUE(th.weak_localization_removed);
    if (th.raw.departs) ++raw_departs;
    const auto v = lphi::verdict::decide(d, th);
    ASSERT_TRUE(v.electrons_cooling.has_value());
    EXPECT_TRUE(*v.electrons_cooling);
    EXPECT_EQ(*v.likely_cause, Cause::intrinsic);
    // The interaction slope is 1 - 3F/4 = 0.625. Its reported error counts
    // only the noise on sigma(0); the subtracted ln L_phi^2 carries the
    // L_phi(T) fit's error, whose slope is uncertain by about p's error, so
    // the band is 4 of both in quadrature.
    const double err = std::hypot(v.evidence.interaction_slope_kappa_err, *d.exponent_p_err);
    EXPECT_NEAR(v.evidence.interaction_slope_kappa, kKappaEe, 4.0 * err);
  }
  // The subtlety the subtraction is for: raw sigma(0) changes slope from
  // 1.625 to 0.625 at T_sat, and the floor model reads that as a departure.
  EXPECT_GE(raw_departs, 8);
}

TEST(VerdictScenarios, HotElectrons) {
  for (std::uint64_t seed = 1; seed <= 10; ++seed) {
    SCOPED_TRACE(seed);
    const auto tab = make_tables(Scenario::heating, seed);
    const auto d = lphi::dephasing::fit_dephasing(tab.lphi);
    ASSERT_TRUE(d.error.empty()) << d.error;
    ASSERT_TRUE(d.state == State::saturated || d.state == State::saturating)
        << lphi::dephasing::state_name(d.state);
    const auto v = lphi::verdict::assess(d, tab.sigma0);
    ASSERT_TRUE(v.electrons_cooling.has_value());
    EXPECT_FALSE(*v.electrons_cooling);
    EXPECT_EQ(*v.likely_cause, Cause::electron_heating_or_noise)
        << lphi::dephasing::state_name(d.state) << " T_sat " << d.t_sat_k.value_or(-1) << " +- "
        << d.t_sat_err_k.value_or(-1) << " floor " << v.evidence.t_floor_k.value_or(-1)
        << " p " << d.exponent_p.value_or(-1) << " note " << v.notes.back();
    ASSERT_TRUE(v.evidence.t_floor_k.has_value());
    // The floor is T_f = 100 mK; within 30% (the scatter over these seeds is
    // about 10%).
    EXPECT_NEAR(*v.evidence.t_floor_k, kTsat, 0.3 * kTsat);
  }
}

TEST(VerdictScenarios, PowerLawCools) {
  for (std::uint64_t seed = 1; seed <= 10; ++seed) {
    SCOPED_TRACE(seed);
    const auto tab = make_tables(Scenario::power_law, seed);
    const auto d = lphi::dephasing::fit_dephasing(tab.lphi);
    ASSERT_EQ(d.state, State::power_law);
    const auto v = lphi::verdict::assess(d, tab.sigma0);
    ASSERT_TRUE(v.electrons_cooling.has_value());
    EXPECT_TRUE(*v.electrons_cooling);
    EXPECT_FALSE(v.likely_cause.has_value());
  }
}

}  // namespace
