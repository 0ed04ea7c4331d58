// Round trips: synthetic sweeps from the forward models, with Gaussian noise,
// through prepare_sweep and fit_sweep, over many seeds. For an unbiased fit
// with honest errors the pulls z = (fit - truth)/err have mean 0 and
// standard deviation 1 (the defining property of a 1-sigma error for a
// maximum-likelihood fit in the near-linear regime; common practice).
//
// Acceptance bands for N seeds: the sample mean of N unit normals has
// standard error 1/sqrt(N), the sample standard deviation 1/sqrt(2(N-1)).
// We accept 4 standard errors (a correct fit fails a given check with
// probability ~6e-5; the seeds are fixed, so the outcome is reproducible)
// plus 0.05 for the O(err) bias and non-Gaussian tails of a nonlinear fit at
// the ~2% relative errors used here. N = 200: |mean| < 0.33, sd in
// [0.75, 1.25]. Seeds: 200, 40 under AddressSanitizer, LPHI_FIT_SEEDS overrides.
#include <gsl/gsl_statistics_double.h>
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

#include "analysis/conductance.hpp"
#include "analysis/constants.hpp"
#include "analysis/sweep_fit.hpp"
#include "analysis/synthetic.hpp"

namespace lc = lphi::conductance;
namespace lf = lphi::fit;
namespace ls = lphi::synthetic;
using lphi::mc::Model;

namespace {

int seed_count() {
  if (const char* env = std::getenv("LPHI_FIT_SEEDS")) return std::max(10, std::atoi(env));
#if defined(__SANITIZE_ADDRESS__)
  return 40;
#else
  return 200;
#endif
}

lc::PreparedSweep prepare(const ls::SweepTruth& truth, const ls::SweepPlan& plan) {
  const std::vector<ls::SyntheticPoint> sweep = ls::make_sweep(truth, plan);
  std::vector<lc::FieldPoint> points;
  for (const ls::SyntheticPoint& p : sweep) points.push_back({p.field_t, p.rsq_ohm});
  lc::PreparedSweep out;
  const lc::PrepareStatus status = lc::prepare_sweep(points, out);
  EXPECT_TRUE(status.ok) << status.error;
  return out;
}

// Standard error of each symmetrized point's conductance: the noise on R_sq
// maps to sigma as dR / R^2, and a mirrored pair averages two readings.
std::vector<double> point_errors(const lc::PreparedSweep& s, double noise_rsq_ohm) {
  std::vector<double> err;
  for (const lc::DeltaSigmaPoint& p : s.points) {
    const double sigma = s.sigma0_s + p.delta_sigma_s;
    const double readings = p.field_t == 0.0 ? 1.0 : 2.0;
    err.push_back(noise_rsq_ohm * sigma * sigma / std::sqrt(readings));
  }
  return err;
}

struct Pulls {
  std::vector<double> lphi, alpha, lso, chi2_red;
};

void expect_unit_normal(const std::vector<double>& z, const std::string& what) {
  ASSERT_GE(z.size(), 10u) << what;
  const double n = static_cast<double>(z.size());
  const double mean = gsl_stats_mean(z.data(), 1, z.size());
  const double sd = gsl_stats_sd(z.data(), 1, z.size());
  const double mean_band = 4.0 / std::sqrt(n) + 0.05;
  const double sd_band = 4.0 / std::sqrt(2.0 * (n - 1.0)) + 0.05;
  std::printf("[  pulls   ] %-36s N = %3zu  mean %+.3f  sd %.3f\n", what.c_str(), z.size(), mean,
              sd);
  EXPECT_LT(std::abs(mean), mean_band) << what << ": mean pull " << mean;
  EXPECT_LT(std::abs(sd - 1.0), sd_band) << what << ": pull standard deviation " << sd;
}

// Fits `seeds` noisy realisations and collects the pulls. Every fit must
// succeed, converge, and carry none of the flags that would mean the sweep
// did not determine the parameters.
Pulls run(const ls::SweepTruth& truth, ls::SweepPlan plan, const lf::SweepFitOptions& options,
          bool with_point_errors = false) {
  Pulls pulls;
  const int seeds = seed_count();
  for (int seed = 1; seed <= seeds; ++seed) {
    plan.seed = static_cast<std::uint64_t>(seed) * 7919u;
    const lc::PreparedSweep s = prepare(truth, plan);
    const std::vector<double> err =
        with_point_errors ? point_errors(s, plan.noise_rsq_ohm) : std::vector<double>{};
    const lf::SweepFitResult r = lf::fit_sweep(s.points, options, err);
    EXPECT_TRUE(r.ok) << r.error;
    if (!r.ok) continue;
    EXPECT_TRUE(r.converged) << "seed " << seed << ": " << r.termination;
    for (lf::Flag f :
         {lf::Flag::window_too_narrow, lf::Flag::alpha_held, lf::Flag::alpha_lphi_degenerate,
          lf::Flag::not_converged, lf::Flag::parameter_at_limit, lf::Flag::too_few_points})
      EXPECT_FALSE(r.has(f)) << "seed " << seed << " flagged " << lf::flag_name(f);
    pulls.lphi.push_back((r.lphi_m - truth.lphi_m) / r.lphi_err_m);
    if (r.alpha && r.alpha_err && *r.alpha_err > 0)
      pulls.alpha.push_back((*r.alpha - truth.alpha) / *r.alpha_err);
    if (r.lso_m && r.lso_err_m) pulls.lso.push_back((*r.lso_m - truth.lso_m) / *r.lso_err_m);
    pulls.chi2_red.push_back(r.chi2_red);
  }
  return pulls;
}

}  // namespace

// Weak localization, HLN with alpha = 1: L_phi = 200 nm (B_phi = 4.1 mT),
// sweep to +-0.1 T (24 B_phi), 401 readings, 0.5 ohm noise on 1 kohm.
TEST(RoundTrip, WeakLocalizationHln) {
  ls::SweepTruth truth;
  truth.model = Model::hln2d;
  truth.lphi_m = 200e-9;
  truth.alpha = 1.0;
  ls::SweepPlan plan;
  plan.max_field_t = 0.1;
  plan.n_points = 401;
  plan.noise_rsq_ohm = 0.5;
  lf::SweepFitOptions options;
  const Pulls p = run(truth, plan, options);
  expect_unit_normal(p.lphi, "hln2d L_phi");
  expect_unit_normal(p.alpha, "hln2d alpha");
}

// Antilocalization in the one-parameter form: alpha = -1/2, same geometry.
TEST(RoundTrip, AntilocalizationHlnAlphaMinusHalf) {
  ls::SweepTruth truth;
  truth.model = Model::hln2d;
  truth.lphi_m = 250e-9;
  truth.alpha = -0.5;
  ls::SweepPlan plan;
  plan.max_field_t = 0.06;
  plan.n_points = 401;
  plan.noise_rsq_ohm = 0.25;
  lf::SweepFitOptions options;
  const Pulls p = run(truth, plan, options);
  expect_unit_normal(p.lphi, "hln2d alpha=-1/2 L_phi");
  expect_unit_normal(p.alpha, "hln2d alpha=-1/2 alpha");
}

// Antilocalization with the three-term spin-orbit form, L_so << L_phi:
// L_phi = 300 nm, L_so = 100 nm (B_so = 9 B_phi), sweep to +-0.3 T.
TEST(RoundTrip, AntilocalizationSpinOrbit) {
  ls::SweepTruth truth;
  truth.model = Model::hln2d_so;
  truth.lphi_m = 300e-9;
  truth.lso_m = 100e-9;
  ls::SweepPlan plan;
  plan.max_field_t = 0.3;
  plan.n_points = 601;
  plan.noise_rsq_ohm = 0.3;
  lf::SweepFitOptions options;
  options.model = Model::hln2d_so;
  const Pulls p = run(truth, plan, options);
  expect_unit_normal(p.lphi, "hln2d_so L_phi");
  expect_unit_normal(p.lso, "hln2d_so L_so");
}

// Quasi-1D wire: w = 50 nm, L_phi = 1 um; the crossover field
// sqrt(3) hbar/(e w L_phi) is 23 mT, the window cap hbar/(e w^2) 0.26 T.
// A metal wire of 20 ohm per square, so that the correction (up to
// 2 pi L_phi / w = 126 e^2/(pi h) = 1.6 mS) stays a few percent of sigma and
// the noise in sigma is nearly the same at every field.
TEST(RoundTrip, Wire) {
  ls::SweepTruth truth;
  truth.model = Model::wire1d;
  truth.lphi_m = 1e-6;
  truth.width_m = 50e-9;
  truth.rsq0_ohm = 20.0;
  ls::SweepPlan plan;
  plan.max_field_t = 0.3;
  plan.n_points = 401;
  plan.noise_rsq_ohm = 2e-3;
  lf::SweepFitOptions options;
  options.model = Model::wire1d;
  options.geometry.width_m = 50e-9;
  const Pulls p = run(truth, plan, options);
  expect_unit_normal(p.lphi, "wire1d L_phi");
}

// 3D film (Kawabata): t = 1 um >> L_phi = 100 nm (B_phi = 16 mT).
TEST(RoundTrip, Kawabata3d) {
  ls::SweepTruth truth;
  truth.model = Model::kawabata3d;
  truth.lphi_m = 100e-9;
  truth.thickness_m = 1e-6;
  ls::SweepPlan plan;
  plan.max_field_t = 0.5;
  plan.n_points = 401;
  plan.noise_rsq_ohm = 2.0;
  lf::SweepFitOptions options;
  options.model = Model::kawabata3d;
  options.geometry.thickness_m = 1e-6;
  const Pulls p = run(truth, plan, options);
  expect_unit_normal(p.lphi, "kawabata3d L_phi");
}

// With the true point errors given, the covariance is used unscaled: the
// pulls must still be unit normal and chi2_red must average 1. The mean of
// N reduced chi-squares with ~190 degrees of freedom has standard error
// sqrt(2/190)/sqrt(N) = 0.007 for N = 200; band 5 of those plus 0.01 for the
// error model's first-order propagation.
TEST(RoundTrip, KnownPointErrors) {
  ls::SweepTruth truth;
  truth.model = Model::hln2d;
  truth.lphi_m = 200e-9;
  ls::SweepPlan plan;
  plan.max_field_t = 0.1;
  plan.n_points = 401;
  plan.noise_rsq_ohm = 0.5;
  lf::SweepFitOptions options;
  const Pulls p = run(truth, plan, options, true);
  expect_unit_normal(p.lphi, "hln2d with point errors, L_phi");
  expect_unit_normal(p.alpha, "hln2d with point errors, alpha");
  const double n = static_cast<double>(p.chi2_red.size());
  const double mean = gsl_stats_mean(p.chi2_red.data(), 1, p.chi2_red.size());
  EXPECT_NEAR(mean, 1.0, 5.0 * std::sqrt(2.0 / 190.0) / std::sqrt(n) + 0.01);
}

// A sweep that stops far below B_phi (B_max = B_phi/5) measures only the
// curvature alpha L_phi^4. The fit must say so (window too narrow, alpha
// held) instead of returning confident numbers.
TEST(RoundTrip, FarTooNarrowWindowIsFlagged) {
  ls::SweepTruth truth;
  truth.model = Model::hln2d;
  truth.lphi_m = 1e-6;  // B_phi = 0.16 mT
  ls::SweepPlan plan;
  plan.max_field_t = 0.2 * lphi::mc::characteristic_field_t(truth.lphi_m);
  plan.n_points = 201;
  plan.noise_rsq_ohm = 0.01;
  for (std::uint64_t seed = 1; seed <= 20; ++seed) {
    plan.seed = seed;
    const lc::PreparedSweep s = prepare(truth, plan);
    const lf::SweepFitResult r = lf::fit_sweep(s.points, lf::SweepFitOptions{});
    ASSERT_TRUE(r.ok) << r.error;
    EXPECT_TRUE(r.has(lf::Flag::window_too_narrow)) << "seed " << seed;
    EXPECT_TRUE(r.has(lf::Flag::alpha_held)) << "seed " << seed;
    EXPECT_EQ(r.alpha_err.value_or(-1.0), 0.0);
  }
}
