// Conversions from lock-in readings to sheet conductance, symmetrization in B
// and the robust zero-field conductance.
#include "analysis/conductance.hpp"

#include <gsl/gsl_linalg.h>
#include <gsl/gsl_matrix.h>
#include <gsl/gsl_permutation.h>
#include <gsl/gsl_statistics_double.h>
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <vector>

#include "analysis/constants.hpp"
#include "analysis/magnetoconductance.hpp"
#include "analysis/synthetic.hpp"

namespace lc = lphi::conductance;

namespace {

// Fields -max .. +max, n points, exactly antisymmetric about zero.
std::vector<double> symmetric_fields(double max_field_t, int n) {
  std::vector<double> b;
  for (int i = 0; i < n; ++i) b.push_back(max_field_t * (2.0 * i - (n - 1)) / (n - 1));
  return b;
}

}  // namespace

// Worked example (Ohm's law, four-terminal): 1 uV across the probes with
// 10 nA flowing is 100 ohm. With a x100 preamplifier the lock-in reads 100 uV
// for the same sample. Exact in decimal arithmetic; 1e-12 relative covers
// binary rounding of the inputs.
TEST(Conversions, ResistanceFromLockin) {
  EXPECT_NEAR(lc::resistance_ohm(1e-6, 10e-9), 100.0, 1e-10);
  EXPECT_NEAR(lc::resistance_ohm(1e-6, 10e-9, 1.0), 100.0, 1e-10);
  EXPECT_NEAR(lc::resistance_ohm(100e-6, 10e-9, 100.0), 100.0, 1e-10);
}

// R_sq = R / (L/W): 2 kohm measured over 4 squares is 500 ohm per square, and
// sigma_sq = 1/R_sq = 2 mS (common practice; worked by hand).
TEST(Conversions, SquaresAndSheetConductance) {
  EXPECT_NEAR(lc::sheet_resistance_ohm(2000.0, 4.0), 500.0, 1e-12);
  EXPECT_NEAR(lc::sheet_resistance_ohm(100.0, 0.5), 200.0, 1e-12);
  EXPECT_NEAR(lc::sheet_conductance_s(500.0), 2e-3, 1e-18);
}

// Undefined conversions are NaN (so prepare_sweep refuses them), never 0 or inf.
TEST(Conversions, UndefinedInputsAreNaN) {
  EXPECT_TRUE(std::isnan(lc::resistance_ohm(1e-6, 0.0)));
  EXPECT_TRUE(std::isnan(lc::resistance_ohm(1e-6, 1e-9, 0.0)));
  EXPECT_TRUE(std::isnan(lc::sheet_resistance_ohm(100.0, 0.0)));
  EXPECT_TRUE(std::isnan(lc::sheet_resistance_ohm(100.0, -2.0)));
  EXPECT_TRUE(std::isnan(lc::sheet_conductance_s(0.0)));
  EXPECT_TRUE(std::isnan(lc::sheet_conductance_xx_s(0.0, 0.0)));
}

// The conductivity tensor is the matrix inverse of the resistivity tensor
// rho = [[rho_xx, rho_xy], [-rho_xy, rho_xx]]; sigma_xx is its (0,0) entry.
// Reference: GSL's LU inverse of the same 2x2 matrix (an independent
// library). Both are a handful of roundings from exact: 1e-13 relative.
TEST(Conversions, HallInversionMatchesMatrixInverse) {
  const double cases[][2] = {{1000.0, 0.0}, {1000.0, 50.0}, {250.0, 4000.0}, {12.5, -7.0}};
  for (const auto& c : cases) {
    gsl_matrix* rho = gsl_matrix_alloc(2, 2);
    gsl_matrix* sigma = gsl_matrix_alloc(2, 2);
    gsl_permutation* perm = gsl_permutation_alloc(2);
    gsl_matrix_set(rho, 0, 0, c[0]);
    gsl_matrix_set(rho, 0, 1, c[1]);
    gsl_matrix_set(rho, 1, 0, -c[1]);
    gsl_matrix_set(rho, 1, 1, c[0]);
    int signum = 0;
    gsl_linalg_LU_decomp(rho, perm, &signum);
    gsl_linalg_LU_invert(rho, perm, sigma);
    const double expected = gsl_matrix_get(sigma, 0, 0);
    EXPECT_NEAR(lc::sheet_conductance_xx_s(c[0], c[1]), expected, 1e-13 * std::abs(expected))
        << "rho_xx = " << c[0] << ", rho_xy = " << c[1];
    gsl_permutation_free(perm);
    gsl_matrix_free(sigma);
    gsl_matrix_free(rho);
  }
  // Without a Hall component the inversion reduces to 1/rho_xx (identity).
  EXPECT_DOUBLE_EQ(lc::sheet_conductance_xx_s(800.0, 0.0), 1.0 / 800.0);
}

// Symmetrizing removes any odd-in-B part exactly. With mirrored fields,
// rho(B) = R0 + a B^2 + c B + d B^3 must come back as R0 + a B^2 to rounding
// (1e-14 relative on the conductance).
TEST(Symmetrize, RemovesOddTermExactlyOnMirroredFields) {
  const double r0 = 1000.0, a = 300.0, c = 45.0, d = -800.0;
  std::vector<lc::FieldPoint> sweep;
  for (double b : symmetric_fields(0.2, 41))
    sweep.push_back({b, r0 + a * b * b + c * b + d * b * b * b});
  lc::PreparedSweep out;
  const lc::PrepareStatus status = lc::prepare_sweep(sweep, out);
  ASSERT_TRUE(status.ok) << status.error;
  ASSERT_EQ(out.points.size(), 21u);
  EXPECT_EQ(out.n_input, 41u);
  EXPECT_DOUBLE_EQ(out.max_field_t, 0.2);
  for (const lc::DeltaSigmaPoint& p : out.points) {
    const double sigma = 1.0 / (r0 + a * p.field_t * p.field_t);
    EXPECT_NEAR(p.delta_sigma_s + out.sigma0_s, sigma, 1e-14 * sigma) << "B = " << p.field_t;
  }
  // The even part is exactly a + c B^2 in rho, not in sigma, so sigma(0) from
  // the quadratic fit (here over all 21 points) is close but not exact: the
  // B^4 term of 1/(R0 + a B^2) is (a B^2/R0)^2 = 1.4e-4 relative at the edge,
  // and the intercept takes a small fraction of it; 1e-5 relative.
  EXPECT_NEAR(out.sigma0_s, 1.0 / r0, 1e-5 / r0);
}

// On interleaved (non-mirrored) fields the opposite branch is interpolated,
// exactly for a linear odd term: rho = R0 + c B must give a
// flat conductance. Fields whose mirror lies outside the other branch are
// dropped.
TEST(Symmetrize, InterpolatesTheOppositeBranch) {
  const double r0 = 500.0, c = 120.0;
  std::vector<lc::FieldPoint> sweep;
  for (int i = 0; i <= 20; ++i) sweep.push_back({0.01 * i + 0.003, r0 + c * (0.01 * i + 0.003)});
  for (int i = 1; i <= 12; ++i) sweep.push_back({-0.0125 * i, r0 - c * 0.0125 * i});
  lc::PreparedSweep out;
  const lc::PrepareStatus status = lc::prepare_sweep(sweep, out);
  ASSERT_TRUE(status.ok) << status.error;
  // Positive side is denser (21 points); mirrors exist for 0.003 .. 0.143 (15 points).
  EXPECT_EQ(out.points.size(), 15u);
  EXPECT_NEAR(out.max_field_t, 0.143, 1e-12);
  EXPECT_NEAR(out.sigma0_s, 1.0 / r0, 1e-15);
  for (const lc::DeltaSigmaPoint& p : out.points) EXPECT_NEAR(p.delta_sigma_s, 0.0, 1e-16);
}

// The opposite branch is interpolated with a cubic, which is exact for
// polynomials up to B^3: rho = R0 + c1 B + c2 B^2 + c3 B^3 on interleaved
// fields symmetrizes to R0 + c2 B^2 exactly (to rounding); linear
// interpolation would leave c2 h^2/8-sized errors.
TEST(Symmetrize, CubicInterpolationIsExactForACubic) {
  const double r0 = 500.0, c1 = 120.0, c2 = 3e3, c3 = -4e4;
  auto rho = [&](double b) { return r0 + c1 * b + c2 * b * b + c3 * b * b * b; };
  std::vector<lc::FieldPoint> sweep;
  for (int i = 0; i <= 20; ++i) sweep.push_back({0.01 * i + 0.003, rho(0.01 * i + 0.003)});
  for (int i = 1; i <= 16; ++i) sweep.push_back({-0.0125 * i, rho(-0.0125 * i)});
  lc::PreparedSweep out;
  ASSERT_TRUE(lc::prepare_sweep(sweep, out).ok);
  ASSERT_GT(out.points.size(), 10u);
  for (const lc::DeltaSigmaPoint& p : out.points) {
    const double even = r0 + c2 * p.field_t * p.field_t;
    EXPECT_NEAR(p.delta_sigma_s + out.sigma0_s, 1.0 / even, 1e-13 / even) << p.field_t;
  }
}

// A weak-localization sweep sampled coarsely: HLN with L_phi = 576 nm
// (B_phi = 0.50 mT, 100 mK in a 1500 ohm film), readings every 0.3 mT on
// each side, the negative branch half a step off the positive one. The
// symmetrized conductance must follow the model within 1e-4 e^2/(pi h),
// below a lock-in noise of ~1e-4 per point, at every point but the
// innermost; linear interpolation errs by 10e-4, 5e-4 and 2e-4 at the
// second to fourth points (about h^2 f''/8, f'' ~ 1/(12 B_phi^2); computed
// with scipy's digamma for this geometry while writing this test). The
// innermost point, at -0.15 mT, is mirrored into the 0.45 mT gap across
// zero field, where the cusp lies between the readings: within 5e-4 there
// (4.1e-4 seen; linear interpolation errs by 36e-4).
TEST(Symmetrize, FollowsTheWeakLocalizationCuspOnCoarseSteps) {
  const double lphi = 576e-9, rsq0 = 1500.0, h = 0.3e-3;
  auto sigma = [&](double b) {
    return 1.0 / rsq0 + lphi::si::wl_conductance_s * lphi::mc::hln2d(b, 1.0, lphi);
  };
  std::vector<lc::FieldPoint> sweep;
  for (int i = 1; i <= 40; ++i) sweep.push_back({h * i, 1.0 / sigma(h * i)});
  for (int i = 0; i <= 40; ++i) sweep.push_back({-h * (i + 0.5), 1.0 / sigma(-h * (i + 0.5))});
  lc::PreparedSweep out;
  ASSERT_TRUE(lc::prepare_sweep(sweep, out).ok);
  ASSERT_GE(out.points.size(), 39u);
  for (const lc::DeltaSigmaPoint& p : out.points)
    EXPECT_NEAR((p.delta_sigma_s + out.sigma0_s - sigma(p.field_t)) / lphi::si::wl_conductance_s, 0.0,
                p.field_t < h ? 5e-4 : 1e-4)
        << p.field_t;
}

// Repeated readings at one field are averaged before symmetrizing.
TEST(Symmetrize, AveragesRepeatedFields) {
  std::vector<lc::FieldPoint> sweep;
  for (double b : symmetric_fields(0.1, 21)) sweep.push_back({b, 100.0});
  sweep.push_back({0.1, 104.0});  // the reading at +0.1 T again, 4 ohm higher
  lc::PreparedSweep out;
  ASSERT_TRUE(lc::prepare_sweep(sweep, out).ok);
  // (100 + 104)/2 = 102 at +0.1 T, mirrored with 100 at -0.1 T: 101 ohm.
  EXPECT_NEAR(out.points.back().delta_sigma_s + out.sigma0_s, 1.0 / 101.0, 1e-15);
}

// sigma(0) survives a wild reading at B = 0. Truth: sigma = s0 + k B^2, noise
// 0.01 ohm on a 1 kohm sample, and the B = 0 reading 5% too high (about 5000
// standard deviations). A single-point estimate would be off by 5%; the
// robust fit must stay within 4 of its own standard errors of the truth.
TEST(ZeroField, RobustAgainstAnOutlierAtZero) {
  const double s0 = 1e-3, k = 2e-5;
  lphi::synthetic::NormalSource noise(7);
  std::vector<lc::FieldPoint> sweep;
  for (double b : symmetric_fields(0.1, 201)) {
    double rho = 1.0 / (s0 + k * b * b) + 0.01 * noise.next();
    if (b == 0.0) rho *= 1.05;
    sweep.push_back({b, rho});
  }
  lc::PreparedSweep out;
  ASSERT_TRUE(lc::prepare_sweep(sweep, out).ok);
  ASSERT_GT(out.sigma0_err_s, 0.0);
  EXPECT_LT(std::abs(out.sigma0_s - s0), 4.0 * out.sigma0_err_s)
      << "sigma0 = " << out.sigma0_s << " +- " << out.sigma0_err_s;
  EXPECT_NEAR(out.rsq0_ohm, 1.0 / out.sigma0_s, 1e-12);
  // The standard error is of the expected size: noise 1e-8 S per reading in
  // sigma, 7e-9 S per mirrored pair, 9 usable points of the innermost 10 in a
  // two-parameter fit: a few 1e-9 S. Allow a factor 3 either way.
  EXPECT_GT(out.sigma0_err_s, 1e-9);
  EXPECT_LT(out.sigma0_err_s, 1.5e-8);
}

// The standard error is honest: over 100 noisy sweeps (no outlier), the
// pulls (sigma0 - s0)/err have standard deviation 1. Band [0.7, 1.35]: the
// sample standard deviation of 100 unit normals has standard error 0.07, and
// the robust weights make err itself scatter by ~10% (common practice: IRLS
// errors are approximate).
TEST(ZeroField, StandardErrorMatchesScatter) {
  const double s0 = 2e-3, k = -1e-5;
  std::vector<double> pulls;
  for (std::uint64_t seed = 1; seed <= 100; ++seed) {
    lphi::synthetic::NormalSource noise(seed);
    std::vector<lc::FieldPoint> sweep;
    for (double b : symmetric_fields(0.05, 161))
      sweep.push_back({b, 1.0 / (s0 + k * b * b) + 0.005 * noise.next()});
    lc::PreparedSweep out;
    ASSERT_TRUE(lc::prepare_sweep(sweep, out).ok);
    pulls.push_back((out.sigma0_s - s0) / out.sigma0_err_s);
  }
  const double mean = gsl_stats_mean(pulls.data(), 1, pulls.size());
  const double sd = gsl_stats_sd(pulls.data(), 1, pulls.size());
  EXPECT_LT(std::abs(mean), 0.4);
  EXPECT_GT(sd, 0.7);
  EXPECT_LT(sd, 1.35);
}

TEST(PrepareSweepErrors, Empty) {
  lc::PreparedSweep out;
  const lc::PrepareStatus s = lc::prepare_sweep({}, out);
  EXPECT_FALSE(s.ok);
  EXPECT_NE(s.error.find("empty"), std::string::npos) << s.error;
}

TEST(PrepareSweepErrors, NonFinite) {
  std::vector<lc::FieldPoint> sweep;
  for (double b : symmetric_fields(0.1, 41)) sweep.push_back({b, 100.0});
  sweep[5].value = std::nan("");
  lc::PreparedSweep out;
  lc::PrepareStatus s = lc::prepare_sweep(sweep, out);
  EXPECT_FALSE(s.ok);
  EXPECT_NE(s.error.find("non-finite sheet resistance"), std::string::npos) << s.error;
  EXPECT_NE(s.error.find("point 5"), std::string::npos) << s.error;

  sweep[5].value = 100.0;
  sweep[7].field_t = INFINITY;
  s = lc::prepare_sweep(sweep, out);
  EXPECT_FALSE(s.ok);
  EXPECT_NE(s.error.find("non-finite field"), std::string::npos) << s.error;
}

TEST(PrepareSweepErrors, NonPositiveResistance) {
  std::vector<lc::FieldPoint> sweep;
  for (double b : symmetric_fields(0.1, 41)) sweep.push_back({b, 100.0});
  sweep[3].value = -1.0;
  lc::PreparedSweep out;
  const lc::PrepareStatus s = lc::prepare_sweep(sweep, out);
  EXPECT_FALSE(s.ok);
  EXPECT_NE(s.error.find("<= 0"), std::string::npos) << s.error;
}

TEST(PrepareSweepErrors, SingleSided) {
  std::vector<lc::FieldPoint> sweep;
  for (int i = 0; i <= 30; ++i) sweep.push_back({0.01 * i, 100.0});
  lc::PreparedSweep out;
  const lc::PrepareStatus s = lc::prepare_sweep(sweep, out);
  EXPECT_FALSE(s.ok);
  EXPECT_NE(s.error.find("does not cross zero field"), std::string::npos) << s.error;
}

TEST(PrepareSweepErrors, TooFewOnOneSide) {
  std::vector<lc::FieldPoint> sweep;
  for (int i = 0; i <= 30; ++i) sweep.push_back({0.01 * i, 100.0});
  for (int i = 1; i <= 7; ++i) sweep.push_back({-0.01 * i, 100.0});
  lc::PreparedSweep out;
  const lc::PrepareStatus s = lc::prepare_sweep(sweep, out);
  EXPECT_FALSE(s.ok);
  EXPECT_NE(s.error.find("7 at B < 0"), std::string::npos) << s.error;
  EXPECT_NE(s.error.find("at least 8"), std::string::npos) << s.error;
}

// Eight points on each side, but the negative branch only reaches -0.8 mT
// while the positive side starts at 1 mT: nothing can be mirrored except the
// B = 0 reading, which is fewer than 8 fields.
TEST(PrepareSweepErrors, BranchesDoNotOverlap) {
  std::vector<lc::FieldPoint> sweep;
  for (int i = 1; i <= 10; ++i) sweep.push_back({0.001 * i, 100.0});
  for (int i = 1; i <= 8; ++i) sweep.push_back({-0.0001 * i, 100.0});
  lc::PreparedSweep out;
  const lc::PrepareStatus s = lc::prepare_sweep(sweep, out);
  EXPECT_FALSE(s.ok);
  EXPECT_NE(s.error.find("mirrored"), std::string::npos) << s.error;
}

// The difference-based noise estimate (Gasser, Sroka & Jennen-Steinmetz,
// Biometrika 73, 625 (1986)) on a smooth weak-localization-like curve with
// uneven field spacing: against the sample standard deviation of the noise
// actually added (GSL gsl_stats_sd), over 40 seeds of 2000 points. The
// MAD-based scale of 2000 normal values has a relative standard error of
// about 1.17/sqrt(2000) = 2.6 % (the MAD's asymptotic efficiency, 37 %, is
// common knowledge of robust statistics, quoted from memory): the mean ratio
// over 40 seeds must lie within 1.5 % of 1 (about 3.5 standard errors of the
// mean), every single one within 12 %.
TEST(PointNoise, MatchesTheNoiseAddedToASmoothCurve) {
  std::vector<double> ratios;
  for (std::uint64_t seed = 1; seed <= 40; ++seed) {
    lphi::synthetic::NormalSource noise(seed);
    std::vector<lc::DeltaSigmaPoint> pts;
    std::vector<double> added;
    const double s = 3e-7;
    for (int i = 0; i < 2000; ++i) {
      const double u = i / 1999.0;
      const double b = 0.05 * u * u;  // dense near zero field, sparse far out
      const double n = s * noise.next();
      added.push_back(n);
      pts.push_back({b, 1e-5 * std::log1p(b * b / 1e-6) + n});
    }
    const double estimate = lc::point_noise_s(pts);
    const double actual = gsl_stats_sd(added.data(), 1, added.size());
    ratios.push_back(estimate / actual);
    EXPECT_NEAR(estimate / actual, 1.0, 0.12) << "seed " << seed;
  }
  EXPECT_NEAR(gsl_stats_mean(ratios.data(), 1, ratios.size()), 1.0, 0.015);
}

// A few wild points (a lock-in glitch) do not move the robust scale by more
// than a few per cent: 10 spikes of 1000 sigma among 2000 points shift the
// median of |e| by about 10 * 3 / 2000 of the distribution (each spike
// spoils up to three differences), 1.5 % in probability, under 3 % in scale.
TEST(PointNoise, SpikesDoNotInflateIt) {
  lphi::synthetic::NormalSource noise(7);
  std::vector<lc::DeltaSigmaPoint> clean;
  for (int i = 0; i < 2000; ++i) clean.push_back({1e-5 * i, 1e-7 * noise.next()});
  auto spiked = clean;
  for (int i = 100; i < 2000; i += 190) spiked[static_cast<std::size_t>(i)].delta_sigma_s += 1e-4;
  const double a = lc::point_noise_s(clean), b = lc::point_noise_s(spiked);
  EXPECT_GT(a, 0.0);
  EXPECT_NEAR(b / a, 1.0, 0.03);
}

// Exact cases: a straight line has no noise (to rounding), and too few
// points or only repeated fields give 0 (unknown).
TEST(PointNoise, ExactCases) {
  std::vector<lc::DeltaSigmaPoint> line;
  for (int i = 0; i < 50; ++i) line.push_back({0.001 * (i * i % 7 + 7 * i), 2e-6 - 3e-5 * 0.001 * (i * i % 7 + 7 * i)});
  std::sort(line.begin(), line.end(), [](const auto& x, const auto& y) { return x.field_t < y.field_t; });
  EXPECT_LT(lc::point_noise_s(line), 1e-18);
  EXPECT_EQ(lc::point_noise_s(std::vector<lc::DeltaSigmaPoint>{{0.0, 1.0}, {0.1, 2.0}}), 0.0);
  EXPECT_EQ(lc::point_noise_s(std::vector<lc::DeltaSigmaPoint>{{0.1, 1.0}, {0.1, 2.0}, {0.1, 3.0}}), 0.0);
}
