// fit_sweep: refusals of bad input, the field window and the quality flags.
#include "analysis/sweep_fit.hpp"

#include <gtest/gtest.h>

#include <cmath>
#include <string>
#include <vector>

#include "analysis/conductance.hpp"
#include "analysis/constants.hpp"
#include "analysis/synthetic.hpp"
#include "tests/analysis/fit/fit_test_names.hpp"


namespace {

lc::PreparedSweep weak_localization(double noise_ohm = 0.2) {
  ls::SweepTruth truth;  // hln2d, L_phi = 200 nm, alpha = 1, 1 kohm
  ls::SweepPlan plan;
  plan.max_field_t = 0.1;
  plan.n_points = 401;
  plan.noise_rsq_ohm = noise_ohm;
  plan.seed = 5;
  return prepared(truth, plan);
}

void expect_refused(const lf::SweepFitResult& r, const std::string& words) {
  EXPECT_FALSE(r.ok);
  EXPECT_NE(r.error.find(words), std::string::npos) << "error was: " << r.error;
}

}  // namespace

TEST(FitSweepInput, Empty) {
  expect_refused(lf::fit_sweep({}, lf::SweepFitOptions{}), "no points");
}

TEST(FitSweepInput, NonFinite) {
  lc::PreparedSweep s = weak_localization();
  s.points[17].delta_sigma_s = std::nan("");
  expect_refused(lf::fit_sweep(s.points, lf::SweepFitOptions{}),
                 "point 17 has a non-finite conductance");
  s = weak_localization();
  s.points[3].field_t = INFINITY;
  expect_refused(lf::fit_sweep(s.points, lf::SweepFitOptions{}), "point 3 has a non-finite field");
}

TEST(FitSweepInput, BadPointErrors) {
  const lc::PreparedSweep s = weak_localization();
  std::vector<double> err(s.points.size() - 1, 1e-8);
  expect_refused(lf::fit_sweep(s.points, lf::SweepFitOptions{}, err), "sigma_err_s has");
  err.assign(s.points.size(), 1e-8);
  err[4] = 0.0;
  expect_refused(lf::fit_sweep(s.points, lf::SweepFitOptions{}, err), "point 4 has an error");
}

TEST(FitSweepInput, OnlyZeroField) {
  std::vector<lc::DeltaSigmaPoint> points(20, {0.0, 0.0});
  expect_refused(lf::fit_sweep(points, lf::SweepFitOptions{}), "every point is at zero field");
}

TEST(FitSweepInput, TooFewPoints) {
  const std::vector<lc::DeltaSigmaPoint> points = {{0.0, 0.0}, {0.01, 1e-6}, {0.02, 2e-6}};
  const lf::SweepFitResult r = lf::fit_sweep(points, lf::SweepFitOptions{});
  expect_refused(r, "too few to fit");
  EXPECT_TRUE(r.has(lf::Flag::too_few_points));
}

TEST(FitSweepInput, WireNeedsWidthFilmNeedsThickness) {
  const lc::PreparedSweep s = weak_localization();
  lf::SweepFitOptions wire;
  wire.model = Model::wire1d;
  expect_refused(lf::fit_sweep(s.points, wire), "needs the wire width");
  lf::SweepFitOptions film;
  film.model = Model::kawabata3d;
  expect_refused(lf::fit_sweep(s.points, film), "needs the film thickness");
  lf::SweepFitOptions negative;
  negative.geometry.mean_free_path_m = -1e-9;
  expect_refused(lf::fit_sweep(s.points, negative), "geometry.mean_free_path_m");
}

TEST(FitSweepInput, BadOptions) {
  const lc::PreparedSweep s = weak_localization();
  lf::SweepFitOptions o;
  o.window_t = -0.1;
  expect_refused(lf::fit_sweep(s.points, o), "window_t");
  o = {};
  o.window_factor = 0.0;
  expect_refused(lf::fit_sweep(s.points, o), "window_factor");
  o = {};
  o.alpha_fixed = std::nan("");
  expect_refused(lf::fit_sweep(s.points, o), "alpha_fixed");
}

// The automatic window is window_factor * B_phi of the fitted L_phi
// (iterated until it settles to 5%), never beyond the data.
TEST(FitSweepWindow, AutomaticWindowFollowsBphi) {
  const lc::PreparedSweep s = weak_localization();
  lf::SweepFitOptions o;
  o.window_factor = 10.0;
  const lf::SweepFitResult r = lf::fit_sweep(s.points, o);
  ASSERT_TRUE(r.ok) << r.error;
  EXPECT_NEAR(r.field_window_t, 10.0 * r.b_phi_t, 0.05 * 10.0 * r.b_phi_t);
  EXPECT_NEAR(r.b_phi_t, lphi::mc::characteristic_field_t(r.lphi_m), 1e-12 * r.b_phi_t);
  // Every point with B <= window is used: fields are 0.5 mT apart.
  EXPECT_NEAR(static_cast<double>(r.n_points), r.field_window_t / 0.5e-3 + 1, 1.0);

  o.window_factor = 1000.0;  // beyond the data: the largest field caps it
  const lf::SweepFitResult wide = lf::fit_sweep(s.points, o);
  EXPECT_DOUBLE_EQ(wide.field_window_t, 0.1);
  EXPECT_EQ(wide.n_points, s.points.size());
}

// B_tr = hbar/(2 e l^2): l = 60 nm gives B_tr = 91 mT, so the window is
// capped at 0.3 B_tr = 27 mT (below 20 B_phi = 82 mT).
TEST(FitSweepWindow, TransportFieldCapsTheWindow) {
  const lc::PreparedSweep s = weak_localization();
  lf::SweepFitOptions o;
  o.geometry.mean_free_path_m = 60e-9;
  const double b_tr = lphi::si::hbar_j_s / (2 * lphi::si::elementary_charge_c * 60e-9 * 60e-9);
  const lf::SweepFitResult r = lf::fit_sweep(s.points, o);
  ASSERT_TRUE(r.ok) << r.error;
  EXPECT_NEAR(r.field_window_t, 0.3 * b_tr, 1e-9);
  EXPECT_FALSE(r.has(lf::Flag::outside_diffusive));
  // A mean free path longer than the fitted L_phi is outside the diffusive regime.
  o.geometry.mean_free_path_m = 400e-9;
  EXPECT_TRUE(lf::fit_sweep(s.points, o).has(lf::Flag::outside_diffusive));
}

TEST(FitSweepWindow, OverrideIsHonoured) {
  const lc::PreparedSweep s = weak_localization();
  lf::SweepFitOptions o;
  o.window_t = 0.03;
  const lf::SweepFitResult r = lf::fit_sweep(s.points, o);
  ASSERT_TRUE(r.ok) << r.error;
  EXPECT_DOUBLE_EQ(r.field_window_t, 0.03);
  EXPECT_EQ(r.n_points, 61u);  // 0, 0.5 mT, ..., 30 mT
}

// alpha is held (and flagged) when the window is below 5 B_phi; a value the
// caller fixes is held without the flag.
TEST(FitSweepFlags, AlphaHeldOrFixed) {
  const lc::PreparedSweep s = weak_localization();
  lf::SweepFitOptions o;
  o.window_t = 3.0 * lphi::mc::characteristic_field_t(200e-9);
  lf::SweepFitResult r = lf::fit_sweep(s.points, o);
  ASSERT_TRUE(r.ok);
  EXPECT_TRUE(r.has(lf::Flag::alpha_held));
  EXPECT_EQ(*r.alpha, 1.0);
  EXPECT_EQ(*r.alpha_err, 0.0);

  o = {};
  o.alpha_fixed = 0.8;
  r = lf::fit_sweep(s.points, o);
  ASSERT_TRUE(r.ok);
  EXPECT_FALSE(r.has(lf::Flag::alpha_held));
  EXPECT_EQ(*r.alpha, 0.8);
}

// Geometry against the fitted L_phi (about 200 nm here).
TEST(FitSweepFlags, DimensionalityMismatch) {
  const lc::PreparedSweep s = weak_localization();
  lf::SweepFitOptions o;
  o.geometry.thickness_m = 20e-9;  // thin film: 2D is right
  EXPECT_FALSE(lf::fit_sweep(s.points, o).has(lf::Flag::dimensionality_mismatch));
  o.geometry.thickness_m = 500e-9;  // thicker than L_phi: not 2D
  EXPECT_TRUE(lf::fit_sweep(s.points, o).has(lf::Flag::dimensionality_mismatch));

  // A Kawabata fit of a film thinner than L_phi is not 3D.
  ls::SweepTruth truth;
  truth.model = Model::kawabata3d;
  truth.lphi_m = 100e-9;
  truth.thickness_m = 30e-9;
  ls::SweepPlan plan;
  plan.max_field_t = 0.5;
  plan.n_points = 401;
  plan.noise_rsq_ohm = 0.1;
  const lc::PreparedSweep film = prepared(truth, plan);
  lf::SweepFitOptions k;
  k.model = Model::kawabata3d;
  k.geometry.thickness_m = 30e-9;
  const lf::SweepFitResult r = lf::fit_sweep(film.points, k);
  ASSERT_TRUE(r.ok) << r.error;
  EXPECT_TRUE(r.has(lf::Flag::dimensionality_mismatch));
}

TEST(FitSweepFlags, FlagNames) {
  EXPECT_EQ(lf::flag_name(lf::Flag::window_too_narrow), "window-too-narrow");
  EXPECT_EQ(lf::flag_name(lf::Flag::alpha_lphi_degenerate), "alpha-lphi-degenerate");
  EXPECT_EQ(lf::flag_name(lf::Flag::parameter_at_limit), "parameter-at-limit");
}

// L_phi far longer than the field step resolves (B_phi = 1.6e-6 T against a
// 0.5 mT step): the curve is logarithmic everywhere and L_phi trades against
// the offset, which must be flagged.
TEST(FitSweepFlags, UnresolvedLengthIsAtLimit) {
  ls::SweepTruth truth;
  truth.lphi_m = 10e-6;
  ls::SweepPlan plan;
  plan.max_field_t = 0.1;
  plan.n_points = 401;
  plan.noise_rsq_ohm = 0.2;
  const lc::PreparedSweep s = prepared(truth, plan);
  const lf::SweepFitResult r = lf::fit_sweep(s.points, lf::SweepFitOptions{});
  ASSERT_TRUE(r.ok) << r.error;
  EXPECT_TRUE(r.has(lf::Flag::parameter_at_limit));
}

// The classical background c B^2 is recovered when asked for: truth
// c = 2e-4 S/T^2 on top of weak localization.
TEST(FitSweepBackground, RecoversQuadraticBackground) {
  ls::SweepTruth truth;
  truth.background_s_per_t2 = 2e-4;
  ls::SweepPlan plan;
  plan.max_field_t = 0.1;
  plan.n_points = 401;
  plan.noise_rsq_ohm = 0.05;
  const lc::PreparedSweep s = prepared(truth, plan);
  lf::SweepFitOptions o;
  o.fit_background = true;
  const lf::SweepFitResult r = lf::fit_sweep(s.points, o);
  ASSERT_TRUE(r.ok) << r.error;
  ASSERT_TRUE(r.background_s_per_t2 && r.background_err_s_per_t2);
  // 5 standard errors: a single fit, so the band is generous.
  EXPECT_NEAR(*r.background_s_per_t2, 2e-4, 5.0 * *r.background_err_s_per_t2);
  EXPECT_NEAR(r.lphi_m, 200e-9, 5.0 * r.lphi_err_m);
}
