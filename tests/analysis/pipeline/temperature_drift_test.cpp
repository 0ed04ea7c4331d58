// Judging a sweep's temperature drift by its effect on L_phi
// (analysis/temperature_drift.hpp): the second-order bias of a linear drift
// against an independent quadrature (Boost.Math's Gauss-Kronrod), a 3 %
// drift used, a ramp and a bump refused with their numbers, the
// thermometer's noise not mistaken for a drift, and bad input refused.
#include <gtest/gtest.h>

#include <boost/math/quadrature/gauss_kronrod.hpp>
#include <cmath>
#include <numbers>
#include <random>
#include <vector>

#include "analysis/temperature_drift.hpp"

namespace {

using lphi::drift::DriftPoint;
using lphi::drift::judge;

// A sweep from -b_max to +b_max over `duration_s`, n points, with the
// temperature given as a function of time.
template <class Temperature>
std::vector<DriftPoint> sweep(std::size_t n, double duration_s, double b_max, Temperature temperature) {
  std::vector<DriftPoint> points;
  for (std::size_t i = 0; i < n; ++i) {
    const double u = static_cast<double>(i) / static_cast<double>(n - 1);
    const double t = u * duration_s;
    points.push_back({t, temperature(t), -b_max + 2.0 * b_max * u});
  }
  return points;
}

// The first term of the estimate is the second-order bias of averaging
// L ~ T^(-s) over a linear drift of +-a around T_eff. Checked against the
// exact mean of (1 + u)^(-s) over u uniform in [-a, a] (Boost.Math
// Gauss-Kronrod quadrature): they agree to O(a^4).
TEST(TemperatureDrift, LinearDriftBiasAgreesWithTheExactAverage) {
  const double t0 = 0.030, drift_k = 0.030 * 0.2;  // 20 %: large enough to see the bias
  const auto points = sweep(2001, 1000.0, 10e-3, [&](double t) { return t0 - drift_k / 2 + drift_k * t / 1000.0; });
  for (double s : {0.5, 1.0 / 3.0, 0.75}) {
    lphi::drift::DriftOptions options;
    options.max_ramp_fraction = 0.5;
    const auto j = judge(points, 0.0, 20e-3, 1.0, s, options);
    ASSERT_TRUE(j.error.empty()) << j.error;
    const double a = drift_k / (2.0 * t0);
    const double exact =
        boost::math::quadrature::gauss_kronrod<double, 31>::integrate(
            [&](double u) { return std::pow(1.0 + u, -s); }, -a, a) /
            (2.0 * a) -
        1.0;
    EXPECT_NEAR(j.temperature_k, t0, 1e-9);
    EXPECT_NEAR(j.drift_k, drift_k, 1e-9);
    EXPECT_NEAR(j.excess_k, 0.0, 1e-9) << "a straight line has no excess scatter";
    EXPECT_NEAR(j.effect_rel, exact, 0.05 * exact) << "s = " << s;
  }
}

// A 3 % drift across a sweep at 30 mK (a still heater settling), with the
// thermometer's 0.2 % noise: the sweep is usable at its mean temperature, and
// the sentence states the drift.
TEST(TemperatureDrift, AThreePercentDriftIsUsedAtTheMeanTemperature) {
  std::mt19937_64 rng(7);
  std::normal_distribution<double> noise(0.0, 0.002);
  const double t0 = 0.030;
  const auto points =
      sweep(2000, 1000.0, 10e-3, [&](double t) { return t0 * (1.0 + 0.03 * (t / 1000.0 - 0.5)) * (1.0 + noise(rng)); });
  const auto j = judge(points, 0.0, 20e-3, 0.01, 0.5);
  ASSERT_TRUE(j.error.empty()) << j.error;
  EXPECT_TRUE(j.usable) << j.sentence;
  EXPECT_EQ(j.reason, "");
  EXPECT_NEAR(j.temperature_k, t0, 0.001 * t0);
  EXPECT_NEAR(j.drift_k, 0.03 * t0, 0.002 * t0);
  EXPECT_LT(j.excess_k, 0.0005 * t0) << "the thermometer's noise is not a drift";
  EXPECT_LT(j.effect_rel, 0.001);
  EXPECT_NE(j.sentence.find("3.0 %"), std::string::npos) << j.sentence;
}

// Only the points inside the window count: a one-sided window at the cold end
// of a drifting sweep reports that end's temperature.
TEST(TemperatureDrift, OnlyThePointsInsideTheWindowCount) {
  const auto points = sweep(1001, 1000.0, 10e-3, [](double t) { return 0.030 + 0.003 * t / 1000.0; });
  const auto j = judge(points, -10e-3, 2e-3, 0.01, 0.5);
  ASSERT_TRUE(j.error.empty()) << j.error;
  EXPECT_EQ(j.n_points, 101u);  // B from -10 to -8 mT, every 20 uT
  EXPECT_NEAR(j.temperature_k, 0.030 + 0.003 * 0.05, 1e-9);
}

// A ramp (1 K to 0.5 K across the sweep) is refused as a ramp, with its size.
TEST(TemperatureDrift, ARampIsRefused) {
  const auto points = sweep(1000, 1000.0, 50e-3, [](double t) { return 1.0 - 0.5 * t / 1000.0; });
  const auto j = judge(points, 0.0, 50e-3, 0.01, 0.5);
  ASSERT_TRUE(j.error.empty()) << j.error;
  EXPECT_FALSE(j.usable);
  EXPECT_EQ(j.reason, "temperature-ramp");
  EXPECT_NE(j.sentence.find("66.7 %"), std::string::npos) << j.sentence;  // 0.5 K around 0.75 K
}

// A heater glitch: a 10 % sin^2 bump over a third of the sweep. A line does
// not follow it; the excess scatter makes the effect larger than a 1 % error.
TEST(TemperatureDrift, ABumpTheLineDoesNotFollowIsRefused) {
  const double t0 = 0.1;
  const auto points = sweep(1000, 1000.0, 50e-3, [&](double t) {
    if (t < 300.0 || t > 600.0) return t0;
    const double x = std::sin(std::numbers::pi * (t - 300.0) / 300.0);
    return t0 * (1.0 + 0.1 * x * x);
  });
  const auto j = judge(points, 0.0, 50e-3, 0.01, 0.5);
  ASSERT_TRUE(j.error.empty()) << j.error;
  EXPECT_GT(j.excess_k, 0.01 * t0);
  EXPECT_FALSE(j.usable);
  EXPECT_EQ(j.reason, "temperature-drift");
  // The same bump is within the error of a fit ten times less precise.
  const auto loose = judge(points, 0.0, 50e-3, 0.2, 0.5);
  EXPECT_TRUE(loose.usable) << loose.sentence;
}

TEST(TemperatureDrift, BadInputIsRefusedWithTheReason) {
  const auto points = sweep(100, 100.0, 1e-3, [](double) { return 0.05; });
  EXPECT_NE(judge(points, 0.0, 0.0, 0.01, 0.5).error.find("window"), std::string::npos);
  EXPECT_NE(judge(points, 0.0, 1e-3, 0.0, 0.5).error.find("relative error"), std::string::npos);
  EXPECT_NE(judge(points, 0.0, 1e-3, 0.01, -1.0).error.find("exponent"), std::string::npos);
  EXPECT_NE(judge(points, 5.0, 1e-3, 0.01, 0.5).error.find("fewer than 3"), std::string::npos);
  auto bad = points;
  bad[3].temperature_k = 0.0;
  EXPECT_NE(judge(bad, 0.0, 1e-3, 0.01, 0.5).error.find("<= 0 K"), std::string::npos);
  bad[3].temperature_k = std::nan("");
  EXPECT_NE(judge(bad, 0.0, 1e-3, 0.01, 0.5).error.find("non-finite"), std::string::npos);
  EXPECT_FALSE(judge(bad, 0.0, 1e-3, 0.01, 0.5).usable);
}

}  // namespace
