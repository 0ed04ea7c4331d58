// Independent cross-check of one HLN fit: the same prepared sweep fitted with
// GSL's nonlinear least squares (gsl_multifit_nlinear, trust-region
// Levenberg-Marquardt, finite-difference Jacobian) and GSL's digamma
// gsl_sf_psi. Nothing of lphi's model, special functions or solver is used on
// the GSL side.
#include <gsl/gsl_blas.h>
#include <gsl/gsl_multifit_nlinear.h>
#include <gsl/gsl_sf_psi.h>
#include <gsl/gsl_vector.h>
#include <gtest/gtest.h>

#include <cmath>
#include <string>
#include <vector>

#include "analysis/conductance.hpp"
#include "analysis/constants.hpp"
#include "analysis/sweep_fit.hpp"
#include "analysis/synthetic.hpp"

namespace lc = lphi::conductance;
namespace lf = lphi::fit;
namespace ls = lphi::synthetic;

namespace {

struct GslData {
  std::vector<double> field_t;
  std::vector<double> y;  // Delta sigma in units of e^2/(pi h)
};

// HLN (Hikami, Larkin, Nagaoka 1980): alpha [psi(1/2 + x) - ln x],
// x = B_phi/B, B_phi = hbar/(4 e L_phi^2); exactly 0 at B = 0. In this
// window x <= 33, where GSL's direct difference keeps ~1e-13 accuracy.
double hln_gsl(double field_t, double alpha, double lphi_m) {
  if (field_t == 0.0) return 0.0;
  const double b_phi = lphi::si::hbar_j_s / (4.0 * lphi::si::elementary_charge_c * lphi_m * lphi_m);
  const double x = b_phi / field_t;
  return alpha * (gsl_sf_psi(0.5 + x) - std::log(x));
}

// Parameters: ln L_phi, alpha, offset.
int residuals(const gsl_vector* p, void* raw, gsl_vector* f) {
  const auto* d = static_cast<const GslData*>(raw);
  const double lphi = std::exp(gsl_vector_get(p, 0));
  const double alpha = gsl_vector_get(p, 1);
  const double offset = gsl_vector_get(p, 2);
  for (std::size_t i = 0; i < d->field_t.size(); ++i)
    gsl_vector_set(f, i, hln_gsl(d->field_t[i], alpha, lphi) + offset - d->y[i]);
  return GSL_SUCCESS;
}

}  // namespace

// Both fits minimise the same chi-square over the same points, so they must
// find the same minimum. Stopping rules (relative steps ~1e-9 on both sides)
// and the finite-difference Jacobian (~1e-8 relative) leave differences far
// below 1% of a standard error; a wrong model, derivative or covariance in
// lphi would show as a difference of order one standard error or one error.
// Tolerances: parameters within 0.01 standard errors, errors within 0.5%.
TEST(GslCrossCheck, HlnFitAgrees) {
  ls::SweepTruth truth;
  truth.model = lphi::mc::Model::hln2d;
  truth.lphi_m = 200e-9;
  truth.alpha = 0.9;
  ls::SweepPlan plan;
  plan.max_field_t = 0.1;
  plan.n_points = 801;
  plan.noise_rsq_ohm = 0.3;
  plan.seed = 11;
  std::vector<lc::FieldPoint> raw;
  for (const auto& p : ls::make_sweep(truth, plan)) raw.push_back({p.field_t, p.rsq_ohm});
  lc::PreparedSweep sweep;
  ASSERT_TRUE(lc::prepare_sweep(raw, sweep).ok);

  const double b_phi = lphi::mc::characteristic_field_t(truth.lphi_m);
  lf::SweepFitOptions options;
  options.window_t = 10.0 * b_phi;  // a fixed window, so both fit the same points
  const lf::SweepFitResult ours = lf::fit_sweep(sweep.points, options);
  ASSERT_TRUE(ours.ok) << ours.error;
  ASSERT_TRUE(ours.converged);
  ASSERT_TRUE(ours.alpha && ours.alpha_err);

  GslData data;
  for (const lc::DeltaSigmaPoint& p : sweep.points)
    if (p.field_t <= *options.window_t * (1 + 1e-12)) {
      data.field_t.push_back(p.field_t);
      data.y.push_back(p.delta_sigma_s / lphi::si::wl_conductance_s);
    }
  ASSERT_EQ(data.field_t.size(), ours.n_points);
  // The smallest nonzero field is 0.25 mT, so x = B_phi/B <= 17.
  ASSERT_LT(b_phi / data.field_t[1], 1e3);

  const std::size_t n = data.field_t.size(), p = 3;
  gsl_multifit_nlinear_fdf fdf;
  fdf.f = residuals;
  fdf.df = nullptr;  // finite differences
  fdf.fvv = nullptr;
  fdf.n = n;
  fdf.p = p;
  fdf.params = &data;
  gsl_multifit_nlinear_parameters params = gsl_multifit_nlinear_default_parameters();
  params.trs = gsl_multifit_nlinear_trs_lm;
  gsl_multifit_nlinear_workspace* w =
      gsl_multifit_nlinear_alloc(gsl_multifit_nlinear_trust, &params, n, p);
  // Start 30% off in L_phi and 20% off in alpha: GSL must find the minimum itself.
  double start[3] = {std::log(1.3 * truth.lphi_m), 0.8 * truth.alpha, 0.0};
  gsl_vector_view x0 = gsl_vector_view_array(start, p);
  gsl_multifit_nlinear_init(&x0.vector, &fdf, w);
  int info = 0;
  const int status =
      gsl_multifit_nlinear_driver(500, 1e-12, 1e-12, 1e-12, nullptr, nullptr, &info, w);
  ASSERT_EQ(status, GSL_SUCCESS);

  gsl_matrix* covariance = gsl_matrix_alloc(p, p);
  gsl_multifit_nlinear_covar(gsl_multifit_nlinear_jac(w), 0.0, covariance);
  double chi2 = 0.0;
  gsl_blas_ddot(gsl_multifit_nlinear_residual(w), gsl_multifit_nlinear_residual(w), &chi2);
  const double scale = chi2 / static_cast<double>(n - p);
  const gsl_vector* best = gsl_multifit_nlinear_position(w);
  const double gsl_lphi = std::exp(gsl_vector_get(best, 0));
  const double gsl_lphi_err = gsl_lphi * std::sqrt(scale * gsl_matrix_get(covariance, 0, 0));
  const double gsl_alpha = gsl_vector_get(best, 1);
  const double gsl_alpha_err = std::sqrt(scale * gsl_matrix_get(covariance, 1, 1));
  const double gsl_offset_s = gsl_vector_get(best, 2) * lphi::si::wl_conductance_s;
  const double gsl_offset_err_s =
      std::sqrt(scale * gsl_matrix_get(covariance, 2, 2)) * lphi::si::wl_conductance_s;
  const double gsl_corr =
      gsl_matrix_get(covariance, 0, 1) /
      std::sqrt(gsl_matrix_get(covariance, 0, 0) * gsl_matrix_get(covariance, 1, 1));

  EXPECT_NEAR(ours.lphi_m, gsl_lphi, 0.01 * gsl_lphi_err);
  EXPECT_NEAR(*ours.alpha, gsl_alpha, 0.01 * gsl_alpha_err);
  EXPECT_NEAR(ours.offset_s, gsl_offset_s, 0.01 * gsl_offset_err_s);
  EXPECT_NEAR(ours.lphi_err_m, gsl_lphi_err, 0.005 * gsl_lphi_err);
  EXPECT_NEAR(*ours.alpha_err, gsl_alpha_err, 0.005 * gsl_alpha_err);
  EXPECT_NEAR(ours.offset_err_s, gsl_offset_err_s, 0.005 * gsl_offset_err_s);
  EXPECT_NEAR(ours.corr_alpha_lphi, gsl_corr, 0.005);
  EXPECT_NEAR(ours.chi2, chi2, 1e-6 * chi2);
  // lphi stopped on its Gauss-Newton test (step left below 1e-3 standard
  // errors, sweep_fit.hpp), the stop these agreements above hold for.
  EXPECT_NE(ours.termination.find("Gauss-Newton step left below"), std::string::npos)
      << ours.termination;

  gsl_matrix_free(covariance);
  gsl_multifit_nlinear_free(w);
}
