// The fitted curve of a sweep fit, the local noise of the points and the
// reduced chi-square of the fit against that noise (sweep_residuals.hpp).
#include "analysis/sweep_residuals.hpp"

#include <gsl/gsl_statistics_double.h>
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <vector>

#include "analysis/conductance.hpp"
#include "analysis/constants.hpp"
#include "analysis/magnetoconductance.hpp"
#include "analysis/sweep_fit.hpp"
#include "analysis/synthetic.hpp"
#include "tests/analysis/fit/fit_test_names.hpp"


namespace {

constexpr double kWl = lphi::si::wl_conductance_s;

// fit_sweep's own chi2_red, recomputed from fitted_delta_sigma_s and
// fitted_parameter_count: sum over the window of ((y - f)/(e^2/(pi h)))^2
// over (n - p). fit_sweep evaluates its residuals on its own path (the
// solver's residual function), so agreement to rounding checks the curve,
// the window and the parameter count together.
double recomputed_chi2_red(const lc::PreparedSweep& s, const lf::SweepFitResult& r,
                           const lf::SweepFitOptions& o) {
  double chi2 = 0.0;
  std::size_t n = 0;
  for (const auto& p : s.points) {
    if (p.field_t > r.field_window_t) continue;
    const double u = (p.delta_sigma_s - lf::fitted_delta_sigma_s(r, o, p.field_t)) / kWl;
    chi2 += u * u;
    ++n;
  }
  EXPECT_EQ(n, r.n_points);
  return chi2 / static_cast<double>(n - static_cast<std::size_t>(lf::fitted_parameter_count(r, o)));
}

// An HLN sweep whose FIELD readings are noisy: the conductance is that of
// the true field, the point sits at the field read. Cold-film numbers:
// L_phi = 0.85 um (B_phi = 0.23 mT), |B| <= 10 mT in 1001 readings, 2 uT rms
// on the field, 1.8e-9 S rms on the conductance (a few 1e-6 of sigma).
std::vector<lc::DeltaSigmaPoint> field_noise_sweep(std::uint64_t seed, double field_noise_t) {
  ls::NormalSource noise(seed);
  std::vector<lc::DeltaSigmaPoint> pts;
  for (int i = 0; i <= 1000; ++i) {
    const double b_true = 0.01 * i / 1000.0;
    const double y = kWl * lphi::mc::hln2d(b_true, 1.0, 0.85e-6) + 1.8e-9 * noise.next();
    const double b_read = std::fabs(b_true + field_noise_t * noise.next());
    pts.push_back({b_read, y});
  }
  std::sort(pts.begin(), pts.end(),
            [](const auto& a, const auto& b) { return a.field_t < b.field_t; });
  return pts;
}

}  // namespace

TEST(FittedCurve, ReproducesTheFitsOwnChiSquare) {
  struct Case {
    const char* name;
    ls::SweepTruth truth;
    lf::SweepFitOptions options;
  };
  std::vector<Case> cases;
  {
    Case c{"hln2d, alpha free", {}, {}};
    cases.push_back(c);
    c.name = "hln2d, alpha held";
    c.options.alpha_fixed = 1.0;
    cases.push_back(c);
    c = Case{"hln2d with a background", {}, {}};
    c.truth.background_s_per_t2 = 2e-4;
    c.options.fit_background = true;
    cases.push_back(c);
    c = Case{"hln2d_so", {}, {}};
    c.truth.model = c.options.model = Model::hln2d_so;
    c.truth.lso_m = 100e-9;
    cases.push_back(c);
    c = Case{"wire1d", {}, {}};
    c.truth.model = c.options.model = Model::wire1d;
    c.truth.width_m = c.options.geometry.width_m = 50e-9;
    c.truth.lphi_m = 1e-6;
    cases.push_back(c);
  }
  for (const Case& c : cases) {
    ls::SweepPlan plan;
    plan.max_field_t = c.truth.model == Model::wire1d ? 0.5 : 0.1;
    plan.noise_rsq_ohm = 0.05;
    const lc::PreparedSweep s = prepared(c.truth, plan);
    const lf::SweepFitResult r = lf::fit_sweep(s.points, c.options);
    ASSERT_TRUE(r.ok) << c.name << ": " << r.error;
    EXPECT_NEAR(recomputed_chi2_red(s, r, c.options) / r.chi2_red, 1.0, 1e-9) << c.name;
  }
}

TEST(FittedCurve, FailedFitGivesNothing) {
  lf::SweepFitResult failed;  // ok = false
  EXPECT_TRUE(std::isnan(lf::fitted_delta_sigma_s(failed, {}, 1e-3)));
  const std::vector<lc::DeltaSigmaPoint> pts = field_noise_sweep(1, 0.0);
  EXPECT_FALSE(lf::chi2_red_against_noise(pts, failed, {}).has_value());
}

// The local noise follows noise that changes along the field: white noise
// whose rms is s0 (1 + 4 exp(-B/b0)) on a smooth curve, against that rms
// itself. In each fifth of the sweep the mean ratio profile/true rms over
// 20 seeds must be within 8 % of 1 (a window of 31 residuals gives each
// point a scale with about 20 % scatter, 1.17/sqrt(31) from the MAD's 37 %
// efficiency, common knowledge of robust statistics quoted from memory;
// the mean over the ~400 points of a fifth and 20 seeds is far tighter, the
// 8 % leaves room for the rms changing inside a window near zero field).
// The single number of point_noise_s cannot follow it: near zero field it
// reads less than half the true rms.
TEST(PointNoiseProfile, FollowsNoiseThatChangesAlongTheField) {
  const double s0 = 1e-9, b0 = 2e-3;
  const auto rms = [&](double b) { return s0 * (1.0 + 4.0 * std::exp(-b / b0)); };
  std::vector<double> ratio_sum(5, 0.0);
  std::vector<int> ratio_count(5, 0);
  double global_near_zero = 0.0;
  for (std::uint64_t seed = 1; seed <= 20; ++seed) {
    ls::NormalSource noise(seed);
    std::vector<lc::DeltaSigmaPoint> pts;
    for (int i = 0; i < 2000; ++i) {
      const double b = 0.02 * i / 1999.0;
      pts.push_back({b, 1e-5 * std::log1p(b * b / 1e-6) + rms(b) * noise.next()});
    }
    const std::vector<double> profile = lc::point_noise_profile_s(pts);
    ASSERT_EQ(profile.size(), pts.size());
    for (std::size_t i = 0; i < pts.size(); ++i) {
      const std::size_t fifth = i * 5 / pts.size();
      ratio_sum[fifth] += profile[i] / rms(pts[i].field_t);
      ++ratio_count[fifth];
    }
    global_near_zero += lc::point_noise_s(pts) / rms(0.0) / 20.0;
  }
  for (std::size_t f = 0; f < 5; ++f)
    EXPECT_NEAR(ratio_sum[f] / ratio_count[f], 1.0, 0.08) << "fifth " << f;
  EXPECT_LT(global_near_zero, 0.5);
}

// Exact and edge cases: a straight line has no noise anywhere; fewer than
// three points give zeros; a sweep shorter than the window uses one window.
TEST(PointNoiseProfile, EdgeCases) {
  std::vector<lc::DeltaSigmaPoint> line;
  for (int i = 0; i < 100; ++i) line.push_back({1e-4 * i, 3e-6 - 2e-5 * 1e-4 * i});
  for (double s : lc::point_noise_profile_s(line)) EXPECT_LT(s, 1e-18);
  EXPECT_EQ(lc::point_noise_profile_s(std::vector<lc::DeltaSigmaPoint>{{0.0, 1.0}, {0.1, 2.0}}),
            (std::vector<double>{0.0, 0.0}));
  ls::NormalSource noise(3);
  std::vector<lc::DeltaSigmaPoint> short_sweep;
  for (int i = 0; i < 12; ++i) short_sweep.push_back({1e-3 * i, 1e-9 * noise.next()});
  const std::vector<double> p = lc::point_noise_profile_s(short_sweep);
  ASSERT_EQ(p.size(), short_sweep.size());
  EXPECT_GT(p.front(), 0.0);
  for (double s : p) EXPECT_EQ(s, p.front());  // one window, shared by all
  EXPECT_DOUBLE_EQ(p.front(), lc::point_noise_s(short_sweep));
}

// With noisy field readings the fit is good but the points near zero field,
// where the curve is steep, are much noisier than the rest. Against the
// sweep's median noise the fit looks bad (chi2_red above 2 on average);
// against the local noise of its residuals it is about 1: the mean over 12
// seeds within [0.8, 1.25] (each value scatters by about sqrt(2/n) with
// n ~ 200 window points, plus the profile's own scatter).
TEST(NoiseChi2, IsAboutOneWhenTheModelFitsDespiteFieldNoise) {
  std::vector<double> local, global;
  for (std::uint64_t seed = 1; seed <= 12; ++seed) {
    const std::vector<lc::DeltaSigmaPoint> pts = field_noise_sweep(seed, 2e-6);
    const lf::SweepFitOptions o;
    const lf::SweepFitResult r = lf::fit_sweep(pts, o);
    ASSERT_TRUE(r.ok) << r.error;
    const auto chi2 = lf::chi2_red_against_noise(pts, r, o);
    ASSERT_TRUE(chi2.has_value());
    local.push_back(*chi2);
    const double median_noise = lc::point_noise_s(pts) / kWl;
    global.push_back(r.chi2_red / (median_noise * median_noise));
  }
  const double mean_local = gsl_stats_mean(local.data(), 1, local.size());
  EXPECT_GT(mean_local, 0.8);
  EXPECT_LT(mean_local, 1.25);
  EXPECT_GT(gsl_stats_mean(global.data(), 1, global.size()), 2.0);
}

// The check can fail: a classical B^2 background the fit does not model
// leaves a smooth misfit that the local noise, taken from differences of
// the residuals, does not absorb. Fitting the background brings chi2_red
// back to about 1.
TEST(NoiseChi2, ShowsAnUnmodelledBackground) {
  ls::SweepTruth truth;  // hln2d, L_phi = 200 nm
  truth.background_s_per_t2 = 3e-4;
  ls::SweepPlan plan;
  plan.max_field_t = 0.1;
  plan.n_points = 801;
  plan.noise_rsq_ohm = 0.02;
  plan.seed = 11;
  const lc::PreparedSweep s = prepared(truth, plan);
  lf::SweepFitOptions without;
  const lf::SweepFitResult bad = lf::fit_sweep(s.points, without);
  ASSERT_TRUE(bad.ok) << bad.error;
  const auto chi2_bad = lf::chi2_red_against_noise(s.points, bad, without);
  ASSERT_TRUE(chi2_bad.has_value());
  EXPECT_GT(*chi2_bad, 5.0);

  lf::SweepFitOptions with;
  with.fit_background = true;
  const lf::SweepFitResult good = lf::fit_sweep(s.points, with);
  ASSERT_TRUE(good.ok) << good.error;
  const auto chi2_good = lf::chi2_red_against_noise(s.points, good, with);
  ASSERT_TRUE(chi2_good.has_value());
  EXPECT_GT(*chi2_good, 0.6);
  EXPECT_LT(*chi2_good, 1.6);
}
