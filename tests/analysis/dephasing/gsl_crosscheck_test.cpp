// Cross-checks of the dephasing fit against GSL, an independent library:
// the saturating and power-law least-squares solutions with their covariance
// (gsl_multifit_nlinear, trust-region Levenberg-Marquardt), and the F
// distribution tail (gsl_cdf_fdist_Q).
#include <gtest/gtest.h>

#include <cmath>
#include <vector>

#include <gsl/gsl_blas.h>
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_multifit_nlinear.h>

#include "analysis/dephasing.hpp"
#include "tests/analysis/dephasing/synthetic_tables.hpp"

namespace {

using lphi::dephasing::LphiPoint;

struct GslData {
  std::vector<double> t, y, sigma;
  bool saturating = true;
};

// The model written independently of lphi's, in the plain parameters
// (ln L_sat^-2, ln b, p) with b in m^-2 K^-p (no centring):
// f_i = (e^u + e^v T^p - y) / sigma, or without the e^u term.
int gsl_f(const gsl_vector* x, void* params, gsl_vector* f) {
  const auto* d = static_cast<const GslData*>(params);
  const std::size_t o = d->saturating ? 1 : 0;
  const double sat = d->saturating ? std::exp(gsl_vector_get(x, 0)) : 0.0;
  const double v = gsl_vector_get(x, o), p = gsl_vector_get(x, o + 1);
  for (std::size_t i = 0; i < d->t.size(); ++i)
    gsl_vector_set(f, i, (sat + std::exp(v) * std::pow(d->t[i], p) - d->y[i]) / d->sigma[i]);
  return GSL_SUCCESS;
}

int gsl_df(const gsl_vector* x, void* params, gsl_matrix* j) {
  const auto* d = static_cast<const GslData*>(params);
  const std::size_t o = d->saturating ? 1 : 0;
  const double v = gsl_vector_get(x, o), p = gsl_vector_get(x, o + 1);
  for (std::size_t i = 0; i < d->t.size(); ++i) {
    const double power = std::exp(v) * std::pow(d->t[i], p);
    if (d->saturating) gsl_matrix_set(j, i, 0, std::exp(gsl_vector_get(x, 0)) / d->sigma[i]);
    gsl_matrix_set(j, i, o, power / d->sigma[i]);
    gsl_matrix_set(j, i, o + 1, std::log(d->t[i]) * power / d->sigma[i]);
  }
  return GSL_SUCCESS;
}

struct GslFit {
  std::vector<double> x;
  std::vector<std::vector<double>> cov;
  double chi2 = 0.0;
  int status = -1;
};

GslFit gsl_fit(GslData& d, std::vector<double> start) {
  const std::size_t n = d.t.size(), k = start.size();
  gsl_multifit_nlinear_parameters params = gsl_multifit_nlinear_default_parameters();
  params.trs = gsl_multifit_nlinear_trs_lm;
  gsl_multifit_nlinear_workspace* w =
      gsl_multifit_nlinear_alloc(gsl_multifit_nlinear_trust, &params, n, k);
  gsl_multifit_nlinear_fdf fdf;
  fdf.f = gsl_f;
  fdf.df = gsl_df;
  fdf.fvv = nullptr;
  fdf.n = n;
  fdf.p = k;
  fdf.params = &d;
  gsl_vector_view x0 = gsl_vector_view_array(start.data(), k);
  gsl_multifit_nlinear_init(&x0.vector, &fdf, w);
  int info = 0;
  GslFit out;
  out.status = gsl_multifit_nlinear_driver(500, 1e-14, 1e-14, 1e-14, nullptr, nullptr, &info, w);
  gsl_matrix* covar = gsl_matrix_alloc(k, k);
  gsl_multifit_nlinear_covar(gsl_multifit_nlinear_jac(w), 0.0, covar);
  const gsl_vector* pos = gsl_multifit_nlinear_position(w);
  gsl_blas_ddot(gsl_multifit_nlinear_residual(w), gsl_multifit_nlinear_residual(w), &out.chi2);
  for (std::size_t a = 0; a < k; ++a) {
    out.x.push_back(gsl_vector_get(pos, a));
    out.cov.emplace_back();
    for (std::size_t b = 0; b < k; ++b) out.cov[a].push_back(gsl_matrix_get(covar, a, b));
  }
  gsl_matrix_free(covar);
  gsl_multifit_nlinear_free(w);
  return out;
}

GslData gsl_data(const std::vector<LphiPoint>& table, bool saturating) {
  GslData d;
  d.saturating = saturating;
  for (const auto& pt : table) {
    d.t.push_back(pt.temperature_k);
    d.y.push_back(std::pow(pt.lphi_m, -2.0));
    d.sigma.push_back(2.0 * pt.lphi_err_m / std::pow(pt.lphi_m, 3.0));
  }
  return d;
}

// Both programs minimise the same chi-square to tolerances near 1e-12; the
// minima they report then agree to about the square root of the cost
// resolution in the parameters, far inside 1e-6 relative. The covariance is
// evaluated at those minima and agrees to the same order; 1e-5 relative on
// errors leaves room for GSL's QR-based covariance.
constexpr double kValueTol = 1e-6;
constexpr double kErrorTol = 1e-5;

TEST(GslCrossCheck, SaturatingFit) {
  lphi::testing::DephasingTruth truth;
  truth.lsat_m = 3e-6;
  truth.p = 1.0;
  truth.b = 1.0 / (truth.lsat_m * truth.lsat_m) / 0.05;
  const auto table =
      lphi::testing::make_lphi_table(truth, lphi::testing::log_spaced(0.02, 1.0, 25), 0.03, 77);
  const auto r = lphi::dephasing::fit_dephasing(table);
  ASSERT_EQ(r.state, lphi::dephasing::State::saturated);

  GslData d = gsl_data(table, true);
  // Start GSL 20% away from the truth in every parameter.
  const GslFit g = gsl_fit(d, {std::log(1.2 / (truth.lsat_m * truth.lsat_m)), std::log(0.8 * truth.b), 1.2});
  ASSERT_EQ(g.status, GSL_SUCCESS);

  EXPECT_NEAR(r.chi2_saturating / g.chi2, 1.0, 1e-9);
  const double u = g.x[0], v = g.x[1], p = g.x[2];
  EXPECT_NEAR(*r.exponent_p / p, 1.0, kValueTol);
  EXPECT_NEAR(*r.prefactor_b / std::exp(v), 1.0, kValueTol);
  EXPECT_NEAR(*r.lphi_sat_m / std::exp(-0.5 * u), 1.0, kValueTol);
  const double t_sat = std::exp((u - v) / p);
  EXPECT_NEAR(*r.t_sat_k / t_sat, 1.0, kValueTol);

  EXPECT_NEAR(*r.exponent_p_err / std::sqrt(g.cov[2][2]), 1.0, kErrorTol);
  EXPECT_NEAR(*r.prefactor_b_err / (std::exp(v) * std::sqrt(g.cov[1][1])), 1.0, kErrorTol);
  EXPECT_NEAR(*r.lphi_sat_err_m / (0.5 * std::exp(-0.5 * u) * std::sqrt(g.cov[0][0])), 1.0, kErrorTol);
  // T_sat error by the delta method in GSL's parameters:
  // ln T_sat = (u - v)/p, gradient (1/p, -1/p, -(u - v)/p^2).
  const double gr[3] = {1.0 / p, -1.0 / p, -(u - v) / (p * p)};
  double var = 0.0;
  for (int a = 0; a < 3; ++a)
    for (int b = 0; b < 3; ++b) var += gr[a] * g.cov[static_cast<std::size_t>(a)][static_cast<std::size_t>(b)] * gr[b];
  EXPECT_NEAR(*r.t_sat_err_k / (t_sat * std::sqrt(var)), 1.0, kErrorTol);
}

TEST(GslCrossCheck, PowerLawFitAndFStatistic) {
  lphi::testing::DephasingTruth truth;
  truth.b = 2.2e12;
  truth.p = 1.0;
  const auto table =
      lphi::testing::make_lphi_table(truth, lphi::testing::log_spaced(0.02, 1.0, 25), 0.03, 78);
  // A saturated table, so that the F statistic is not zero.
  lphi::testing::DephasingTruth sat = truth;
  sat.lsat_m = 4e-6;
  const auto table_sat =
      lphi::testing::make_lphi_table(sat, lphi::testing::log_spaced(0.02, 1.0, 25), 0.03, 79);

  for (const auto* t : {&table, &table_sat}) {
    const auto r = lphi::dephasing::fit_dephasing(*t);
    GslData d = gsl_data(*t, false);
    const GslFit g = gsl_fit(d, {std::log(0.8 * truth.b), 1.2});
    ASSERT_EQ(g.status, GSL_SUCCESS);
    EXPECT_NEAR(r.power_law.chi2 / g.chi2, 1.0, 1e-9);
    EXPECT_NEAR(r.power_law.p / g.x[1], 1.0, kValueTol);
    EXPECT_NEAR(r.power_law.b / std::exp(g.x[0]), 1.0, kValueTol);
    EXPECT_NEAR(r.power_law.p_err / std::sqrt(g.cov[1][1]), 1.0, kErrorTol);
    EXPECT_NEAR(r.power_law.b_err / (std::exp(g.x[0]) * std::sqrt(g.cov[0][0])), 1.0, kErrorTol);
    if (r.f_statistic > 0.0) {
      // The reported p-value is the F(1, n-3) upper tail of the reported F.
      EXPECT_NEAR(r.p_value, gsl_cdf_fdist_Q(r.f_statistic, 1.0, 22.0),
                  1e-9 * gsl_cdf_fdist_Q(r.f_statistic, 1.0, 22.0) + 1e-300);
    }
  }
}

TEST(FDistribution, UpperTailAgainstGsl) {
  // gsl_cdf_fdist_Q evaluates the same tail through GSL's own incomplete beta
  // function; both are accurate to near double precision, so 1e-10 relative.
  const double cases[][3] = {{0.5, 1, 10}, {3.0, 1, 20}, {10.0, 1, 5},  {2.5, 2, 7},
                             {50.0, 1, 30}, {0.01, 1, 3}, {7.3, 1, 100}, {1.0, 3, 12}};
  for (const auto& c : cases) {
    const double ours = lphi::dephasing::f_distribution_upper_tail(c[0], c[1], c[2]);
    const double gsl = gsl_cdf_fdist_Q(c[0], c[1], c[2]);
    EXPECT_NEAR(ours / gsl, 1.0, 1e-10) << c[0] << " " << c[1] << " " << c[2];
  }
}

TEST(FDistribution, PrintedCriticalValues) {
  // Critical values of F(1, 10) from the standard printed tables (from
  // memory; Abramowitz and Stegun Table 26.9 lists the same distribution):
  // F_0.05 = 4.96, F_0.01 = 10.04. Printed to two decimals, so the true
  // critical value lies within +-0.005 of it: the tail must bracket alpha.
  using lphi::dephasing::f_distribution_upper_tail;
  EXPECT_GT(f_distribution_upper_tail(4.955, 1, 10), 0.05);
  EXPECT_LT(f_distribution_upper_tail(4.965, 1, 10), 0.05);
  EXPECT_GT(f_distribution_upper_tail(10.035, 1, 10), 0.01);
  EXPECT_LT(f_distribution_upper_tail(10.045, 1, 10), 0.01);
  EXPECT_TRUE(std::isnan(f_distribution_upper_tail(-1.0, 1, 10)));
  EXPECT_TRUE(std::isnan(f_distribution_upper_tail(1.0, 0, 10)));
}

TEST(FDistribution, NestedTestEdgeCases) {
  using lphi::dephasing::nested_f_test;
  // No improvement: F = 0, p = 1.
  auto t = nested_f_test(10.0, 10.0, 20, 3, 1, 1000.0);
  EXPECT_EQ(t.f_statistic, 0.0);
  EXPECT_EQ(t.p_value, 1.0);
  // Improvement below the rounding resolution of the sum of squares.
  t = nested_f_test(1e-20, 0.0, 20, 3, 1, 1.0);
  EXPECT_EQ(t.p_value, 1.0);
  // A real improvement to a perfect fit.
  t = nested_f_test(5.0, 0.0, 20, 3, 1, 100.0);
  EXPECT_TRUE(std::isinf(t.f_statistic));
  EXPECT_EQ(t.p_value, 0.0);
  // (30 - 17)/1 / (17/17) = 13, against GSL.
  t = nested_f_test(30.0, 17.0, 20, 3, 1, 100.0);
  EXPECT_NEAR(t.f_statistic, 13.0, 1e-12);
  EXPECT_NEAR(t.p_value / gsl_cdf_fdist_Q(13.0, 1, 17), 1.0, 1e-10);
}

}  // namespace
