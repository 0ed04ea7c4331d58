// analyse_zero_field: the ln T electron thermometer and its floor.
//
// Synthetic sigma(T) over 20 mK - 1 K with noise 0.02 e^2/(pi h) per point
// (2.5e-7 S, a lock-in measurement of a 1 kohm film at the 1e-4 level;
// common practice). z-score bands as in fit_dephasing_test.cpp: with N seeds
// the sample mean scatters by 1/sqrt(N) and the width by about 1/sqrt(2N).
#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <numbers>
#include <vector>

#include "analysis/constants.hpp"
#include "analysis/thermometry.hpp"
#include "tests/analysis/dephasing/synthetic_tables.hpp"

namespace {

using lphi::testing::log_spaced;
using lphi::testing::make_sigma_table;
using lphi::thermometry::analyse_zero_field;
using lphi::thermometry::ThermometryOptions;
using lphi::thermometry::ZeroFieldPoint;

constexpr double kSigma1 = 1e-3;  // S, a 1 kohm film
constexpr double kNoise = 0.02;   // e^2/(pi h)

using lphi::testing::ZStats;

TEST(Thermometry, UnitOfKappaPerDecade) {
  // analysis/PHYSICS.md, "Zero-field temperature dependence" (derivation):
  // one unit of kappa is e^2/(pi h) ln 10 = 2.84e-5 S
  // per decade of T. e^2/(pi h) from the SI 2019 exact e and h (BIPM SI
  // brochure, 9th edition) typed here, so the check is independent of
  // analysis/constants.hpp; 2.84e-5 is quoted to three figures.
  const double e = 1.602176634e-19, h = 6.62607015e-34;
  const double unit = e * e / (std::numbers::pi * h);
  EXPECT_NEAR(unit / lphi::si::wl_conductance_s, 1.0, 1e-15);
  EXPECT_NEAR(unit * std::log(10.0), 2.84e-5, 0.005e-5);

  // A noise-free table falling 2.84e-5 S per decade is kappa = 1 to the three
  // figures of the quoted value (2.84e-5 / 2.8394e-5 = 1.0002).
  std::vector<ZeroFieldPoint> table;
  for (double t : log_spaced(0.02, 1.0, 12)) table.push_back({t, kSigma1 + 2.84e-5 * std::log10(t), 0.0});
  const auto r = analyse_zero_field(table);
  ASSERT_TRUE(r.error.empty()) << r.error;
  ASSERT_TRUE(r.sufficient);
  EXPECT_NEAR(r.slope_kappa, 1.0, 0.002);
  EXPECT_FALSE(r.departs);
  EXPECT_NEAR(r.sigma_1_s, kSigma1, 1e-12);
}

TEST(Thermometry, PureLogarithmDoesNotDepart) {
  const auto table = make_sigma_table(kSigma1, 1.0, 0.0, log_spaced(0.02, 1.0, 20), kNoise, 31);
  const auto r = analyse_zero_field(table);
  ASSERT_TRUE(r.error.empty()) << r.error;
  EXPECT_TRUE(r.sufficient);
  EXPECT_FALSE(r.departs);
  EXPECT_FALSE(r.floor_temperature_k.has_value());
  EXPECT_GT(r.slope_kappa_err, 0.0);
  EXPECT_LT(std::abs(r.slope_kappa - 1.0), 3.0 * r.slope_kappa_err);
}

TEST(Thermometry, PureLogarithmOverSeeds) {
  // False departures at significance 0.01 in about 1% of tables or fewer
  // (T_floor >= 0 puts many tables on the boundary), and the slope's z-scores
  // of unit width.
  const auto temps = log_spaced(0.02, 1.0, 20);
  ZStats zk;
  int departs = 0;
  const int seeds = 300;
  for (int s = 0; s < seeds; ++s) {
    const auto r = analyse_zero_field(make_sigma_table(kSigma1, 1.0, 0.0, temps, kNoise, 300 + static_cast<unsigned>(s)));
    ASSERT_TRUE(r.sufficient);
    if (r.departs) ++departs;
    else zk.add((r.slope_kappa - 1.0) / r.slope_kappa_err);
  }
  EXPECT_LE(departs, 12);  // Binomial(300, 0.01) has mean 3
  EXPECT_LT(std::abs(zk.mean()), 0.25);
  EXPECT_GT(zk.width(), 0.85);
  EXPECT_LT(zk.width(), 1.15);
}

TEST(Thermometry, FloorAt60mKDeparts) {
  const auto table = make_sigma_table(kSigma1, 1.0, 0.060, log_spaced(0.02, 1.0, 20), kNoise, 41);
  const auto r = analyse_zero_field(table);
  ASSERT_TRUE(r.error.empty()) << r.error;
  EXPECT_TRUE(r.departs);
  EXPECT_LT(r.p_value, 0.01);
  ASSERT_TRUE(r.floor_temperature_k && r.floor_temperature_err_k);
  EXPECT_LT(std::abs(*r.floor_temperature_k - 0.060), 3.0 * *r.floor_temperature_err_k);
  EXPECT_LT(std::abs(r.slope_kappa - 1.0), 3.0 * r.slope_kappa_err);
}

TEST(Thermometry, FloorZScoresOverSeeds) {
  const auto temps = log_spaced(0.02, 1.0, 20);
  ZStats zf, zk;
  int departs = 0;
  const int seeds = 300;
  for (int s = 0; s < seeds; ++s) {
    const auto r = analyse_zero_field(make_sigma_table(kSigma1, 1.0, 0.060, temps, kNoise, 900 + static_cast<unsigned>(s)));
    if (!r.departs) continue;
    ++departs;
    zf.add(std::log(*r.floor_temperature_k / 0.060) / (*r.floor_temperature_err_k / *r.floor_temperature_k));
    zk.add((r.slope_kappa - 1.0) / r.slope_kappa_err);
  }
  EXPECT_GE(departs, seeds - 3);
  for (const ZStats* z : {&zf, &zk}) {
    EXPECT_LT(std::abs(z->mean()), 0.25);
    EXPECT_GT(z->width(), 0.85);
    EXPECT_LT(z->width(), 1.2);
  }
}

TEST(Thermometry, UnknownErrorsScaleWithScatter) {
  // Equal weights either way, so the same floor; the errors are the
  // known-error ones times sqrt(chi2/(n - 3)) (documented scaling, an
  // identity of least squares).
  const auto known = make_sigma_table(kSigma1, 1.0, 0.060, log_spaced(0.02, 1.0, 20), kNoise, 43);
  auto unknown = known;
  for (auto& pt : unknown) pt.sigma_err_s = 0.0;
  const auto a = analyse_zero_field(known);
  const auto b = analyse_zero_field(unknown);
  ASSERT_TRUE(a.departs && b.departs);
  EXPECT_TRUE(b.errors_from_scatter);
  EXPECT_NEAR(*b.floor_temperature_k / *a.floor_temperature_k, 1.0, 1e-6);
  const double scale = std::sqrt(a.chi2_floor / 17.0);
  EXPECT_NEAR(*b.floor_temperature_err_k / (*a.floor_temperature_err_k * scale), 1.0, 1e-5);
  EXPECT_NEAR(b.slope_kappa_err / (a.slope_kappa_err * scale), 1.0, 1e-5);
}

TEST(Thermometry, TooFewPointsOrNarrowSpan) {
  auto r = analyse_zero_field(make_sigma_table(kSigma1, 1.0, 0.0, log_spaced(0.02, 1.0, 3), kNoise, 1));
  EXPECT_TRUE(r.error.empty());
  EXPECT_FALSE(r.sufficient);
  EXPECT_FALSE(r.departs);
  r = analyse_zero_field(make_sigma_table(kSigma1, 1.0, 0.0, log_spaced(0.5, 1.0, 20), kNoise, 1));
  EXPECT_FALSE(r.sufficient);
  r = analyse_zero_field({});
  EXPECT_FALSE(r.sufficient);
  EXPECT_TRUE(r.error.empty());
}

TEST(Thermometry, RepeatedTemperaturesAreAllowed) {
  auto temps = log_spaced(0.02, 1.0, 10);
  temps.insert(temps.end(), temps.begin(), temps.end());
  const auto r = analyse_zero_field(make_sigma_table(kSigma1, 1.0, 0.060, temps, kNoise, 5));
  ASSERT_TRUE(r.error.empty()) << r.error;
  EXPECT_EQ(r.n_temperatures, 10u);
  EXPECT_TRUE(r.departs);
}

TEST(Thermometry, RefusesBadInput) {
  const auto good = make_sigma_table(kSigma1, 1.0, 0.0, log_spaced(0.02, 1.0, 10), kNoise, 2);
  const double nan = std::numeric_limits<double>::quiet_NaN();
  auto check = [&](void (*spoil)(ZeroFieldPoint&, double), const char* field) {
    auto bad = good;
    spoil(bad[3], nan);
    const auto r = analyse_zero_field(bad);
    EXPECT_FALSE(r.sufficient) << field;
    EXPECT_NE(r.error.find(field), std::string::npos) << r.error;
  };
  check([](ZeroFieldPoint& p, double) { p.temperature_k = 0.0; }, "temperature_k");
  check([](ZeroFieldPoint& p, double) { p.temperature_k = -0.02; }, "temperature_k");
  check([](ZeroFieldPoint& p, double n) { p.temperature_k = n; }, "temperature_k");
  check([](ZeroFieldPoint& p, double n) { p.sigma_s = n; }, "sigma_s");
  check([](ZeroFieldPoint& p, double) { p.sigma_err_s = -1.0; }, "sigma_err_s");
  check([](ZeroFieldPoint& p, double) { p.sigma_err_s = 0.0; }, "sigma_err_s");  // mixed
  ThermometryOptions o;
  o.min_points = 2;
  EXPECT_NE(analyse_zero_field(good, o).error.find("min_points"), std::string::npos);
}

}  // namespace
