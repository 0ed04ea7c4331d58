// The runs test on residual signs and the judgement of a fit's quality
// against the sweep's own noise (sweep_residuals.hpp).
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <string>
#include <utility>
#include <vector>

#include "analysis/conductance.hpp"
#include "analysis/constants.hpp"
#include "analysis/magnetoconductance.hpp"
#include "analysis/sweep_fit.hpp"
#include "analysis/sweep_residuals.hpp"
#include "analysis/synthetic.hpp"
#include "tests/analysis/fit/fit_test_names.hpp"

namespace {

constexpr double kWl = lphi::si::wl_conductance_s;

std::size_t count_runs(const std::vector<int>& signs) {
  std::size_t runs = 0;
  for (std::size_t i = 0; i < signs.size(); ++i)
    if (i == 0 || signs[i] != signs[i - 1]) ++runs;
  return runs;
}

// P(R <= r) by enumerating every arrangement of n1 (+1) and n2 (-1): the
// definition of the test (Wald and Wolfowitz 1940), independent of the
// Swed-Eisenhart sum and of any approximation.
double enumerated_p(int n1, int n2, std::size_t r) {
  std::vector<int> signs(static_cast<std::size_t>(n2), -1);
  signs.resize(static_cast<std::size_t>(n1 + n2), 1);  // sorted: all -1 then +1
  std::size_t at_most = 0, total = 0;
  do {
    ++total;
    if (count_runs(signs) <= r) ++at_most;
  } while (std::next_permutation(signs.begin(), signs.end()));
  return static_cast<double>(at_most) / static_cast<double>(total);
}

std::vector<double> as_values(const std::vector<int>& signs) {
  return std::vector<double>(signs.begin(), signs.end());
}

}  // namespace

// The exact branch against complete enumeration, for every possible number
// of runs at a few small (n1, n2).
TEST(RunsTest, ExactMatchesEnumeration) {
  for (auto [n1, n2] : {std::pair{5, 5}, std::pair{7, 4}, std::pair{9, 6}, std::pair{3, 10}}) {
    // Arrangements with r runs: build one for each r and compare p.
    std::vector<int> signs(static_cast<std::size_t>(n2), -1);
    signs.resize(static_cast<std::size_t>(n1 + n2), 1);
    std::vector<bool> seen(static_cast<std::size_t>(n1 + n2 + 1), false);
    do {
      const std::size_t r = count_runs(signs);
      if (seen[r]) continue;
      seen[r] = true;
      const lf::RunsTest t = lf::runs_test(as_values(signs));
      EXPECT_EQ(t.runs, r);
      EXPECT_EQ(t.n_positive, static_cast<std::size_t>(n1));
      EXPECT_EQ(t.n_negative, static_cast<std::size_t>(n2));
      EXPECT_NEAR(t.p_value, enumerated_p(n1, n2, r), 1e-12) << n1 << " " << n2 << " r " << r;
    } while (std::next_permutation(signs.begin(), signs.end()));
  }
}

// The normal branch (n > 200) against Monte Carlo: 20000 random orders of
// the same signs, the fraction with at most the observed runs. Agreement
// within 4 binomial standard errors plus 0.005 (the continuity-corrected
// normal approximation's own error at n ~ 300).
TEST(RunsTest, NormalBranchMatchesMonteCarlo) {
  ls::NormalSource normal(17);
  for (int shift : {0, 12, 20}) {
    // 300 signs with runs lowered by pairing: every other sign repeated.
    std::vector<int> signs;
    for (int i = 0; i < 300; ++i) signs.push_back(normal.next() > 0.0 ? 1 : -1);
    for (std::size_t i = 1; i < static_cast<std::size_t>(shift) * 10; i += 2)
      signs[i] = signs[i - 1];
    const lf::RunsTest t = lf::runs_test(as_values(signs));
    std::vector<int> shuffled = signs;
    std::uint64_t state = 99;
    auto next_index = [&](std::size_t n) {
      state = state * 6364136223846793005ull + 1442695040888963407ull;
      return static_cast<std::size_t>((state >> 33) % n);
    };
    const int trials = 20000;
    int at_most = 0;
    for (int k = 0; k < trials; ++k) {
      for (std::size_t i = shuffled.size() - 1; i > 0; --i)
        std::swap(shuffled[i], shuffled[next_index(i + 1)]);
      if (count_runs(shuffled) <= t.runs) ++at_most;
    }
    const double p = static_cast<double>(at_most) / trials;
    const double se = std::sqrt(std::max(p * (1 - p), 1e-4) / trials);
    EXPECT_NEAR(t.p_value, p, 4.0 * se + 0.005) << "shift " << shift;
  }
}

TEST(RunsTest, OneSignOnlyAndZerosLeftOut) {
  const lf::RunsTest t = lf::runs_test(std::vector<double>{1.0, 2.0, 0.0, 3.0});
  EXPECT_EQ(t.n_positive, 3u);
  EXPECT_EQ(t.n_negative, 0u);
  EXPECT_EQ(t.p_value, 1.0);
}

namespace {

// Delta sigma points from hln2d_so (or hln2d when lso_m = 0), 0 < B <= max,
// with noise of noise_wl e^2/(pi h), optionally correlated as AR(1) with
// coefficient rho (a lock-in time constant spanning a few points), scaled
// so that the marginal noise stays noise_wl.
std::vector<lc::DeltaSigmaPoint> curve(double lphi_m, double lso_m, double max_field_t,
                                       std::size_t n, double noise_wl, double rho,
                                       std::uint64_t seed) {
  ls::NormalSource normal(seed);
  std::vector<lc::DeltaSigmaPoint> pts;
  double e = normal.next();
  for (std::size_t i = 1; i <= n; ++i) {
    const double b = max_field_t * static_cast<double>(i) / static_cast<double>(n);
    e = rho * e + std::sqrt(1.0 - rho * rho) * normal.next();
    const double model =
        lso_m > 0.0 ? lphi::mc::hln2d_so(b, lphi_m, lso_m) : lphi::mc::hln2d(b, 1.0, lphi_m);
    pts.push_back({b, kWl * (model + noise_wl * e)});
  }
  return pts;
}

}  // namespace

// A good fit: chi2_red about 1, no structure, errors not scaled, usable.
TEST(JudgeQuality, GoodFitIsUsable) {
  const auto pts = curve(200e-9, 0.0, 0.08, 800, 0.02, 0.0, 4);
  const lf::SweepFitOptions o;
  const lf::SweepFitResult r = lf::fit_sweep(pts, o);
  ASSERT_TRUE(r.ok) << r.error;
  const lf::FitQuality q = lf::judge_quality(pts, r, o);
  ASSERT_TRUE(q.chi2_red);
  EXPECT_NEAR(*q.chi2_red, 1.0, 0.25);
  EXPECT_GT(q.runs_p, 1e-3);
  EXPECT_EQ(q.error_scale, std::sqrt(std::max(1.0, *q.chi2_red)));
  EXPECT_LT(q.error_scale, 1.15);
  EXPECT_FALSE(q.unusable) << q.reason;
  EXPECT_TRUE(q.reason.empty());
}

// Correlated noise (AR(1), rho = 0.8: a time constant of ~5 points) on a
// correct model shortens the runs of single points, but the blocks follow
// the correlation time and the fit stays usable.
TEST(JudgeQuality, CorrelatedNoiseAloneIsNotStructure) {
  const auto pts = curve(200e-9, 0.0, 0.08, 1000, 0.02, 0.8, 6);
  const lf::SweepFitOptions o;
  const lf::SweepFitResult r = lf::fit_sweep(pts, o);
  ASSERT_TRUE(r.ok) << r.error;
  const lf::FitQuality q = lf::judge_quality(pts, r, o);
  EXPECT_GT(q.runs_block, 3u);
  EXPECT_GT(q.runs_p, 1e-4);
  EXPECT_FALSE(q.unusable) << q.reason;
}

// Antilocalization (hln2d-so, L_phi = 500 nm, L_so = 100 nm) fitted with
// hln2d: the wrong model leaves long runs of one sign and a chi2_red far
// above 1; the fit is unusable, with the numbers in the reason, and its
// errors would be scaled by sqrt(chi2_red).
TEST(JudgeQuality, WrongModelIsUnusable) {
  const auto pts = curve(500e-9, 100e-9, 0.3, 1000, 0.01, 0.0, 8);
  const lf::SweepFitOptions o;
  const lf::SweepFitResult r = lf::fit_sweep(pts, o);
  ASSERT_TRUE(r.ok) << r.error;
  const lf::FitQuality q = lf::judge_quality(pts, r, o);
  ASSERT_TRUE(q.chi2_red);
  EXPECT_GT(*q.chi2_red, lf::kChi2RedUnusable);
  EXPECT_NEAR(q.error_scale, std::sqrt(*q.chi2_red), 1e-12);
  EXPECT_LT(q.runs_p, lf::kRunsPUnusable);
  EXPECT_TRUE(q.unusable);
  EXPECT_NE(q.reason.find("chi2_red"), std::string::npos) << q.reason;
}

TEST(JudgeQuality, FailedFitIsUnusable) {
  const lf::SweepFitResult failed;  // ok false
  const lf::FitQuality q = lf::judge_quality({}, failed, lf::SweepFitOptions{});
  EXPECT_TRUE(q.unusable);
  EXPECT_FALSE(q.reason.empty());
}
