// Which fits enter L_phi(T) (daemon/live/fit_admission.hpp): the exponents
// the drift is judged with, the scaled error, a drifting sweep used at its
// window's mean temperature or kept out with its numbers, and the plateau
// comparison (flagged with one earlier sweep, left out with two).
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "daemon/live/fit_admission.hpp"

namespace {

using lphi::live::FitRecord;

FitRecord used_fit(double lphi_m, double err_m, double temperature_k, std::int64_t run = 0) {
  FitRecord f;
  f.ok = true;
  f.lphi_m = lphi_m;
  f.lphi_err_m = err_m;
  f.temperature_k = temperature_k;
  f.temperature_run = run;
  f.used_in_dephasing = true;
  f.result = {{"field_window_t", 5e-3}, {"error_scale", 1.0}};
  return f;
}

bool has_reason(const FitRecord& f, const std::string& prefix) {
  return std::any_of(f.quality.begin(), f.quality.end(),
                     [&](const std::string& q) { return q.rfind(prefix, 0) == 0; });
}

// s = p/2 with p = 1 (2D), 2/3 (1D), 3/2 (3D): the standard dephasing
// exponents of electron-electron scattering (analysis/PHYSICS.md,
// "Dephasing rate versus temperature"); a fitted p only raises it.
TEST(FitAdmission, ExponentsAndTheScaledError) {
  EXPECT_DOUBLE_EQ(lphi::live::expected_lphi_exponent(2), 0.5);
  EXPECT_DOUBLE_EQ(lphi::live::expected_lphi_exponent(1), 1.0 / 3.0);
  EXPECT_DOUBLE_EQ(lphi::live::expected_lphi_exponent(3), 0.75);
  EXPECT_DOUBLE_EQ(lphi::live::drift_exponent(2, 3.0), 1.5);
  EXPECT_DOUBLE_EQ(lphi::live::drift_exponent(2, 0.2), 0.5);
  EXPECT_DOUBLE_EQ(lphi::live::drift_exponent(2, 9.0), 0.5) << "an absurd fitted p is ignored";
  FitRecord f = used_fit(1e-6, 1e-8, 0.03);
  f.result["error_scale"] = 3.0;
  EXPECT_DOUBLE_EQ(lphi::live::scaled_lphi_error_m(f), 3e-8);
  f.result.erase("error_scale");
  EXPECT_DOUBLE_EQ(lphi::live::scaled_lphi_error_m(f), 1e-8);
}

// A sweep from -5 to +5 mT whose temperature drifts 3 % (29.55 to 30.45 mK):
// used, reported at its mean temperature, the drift stated. The same sweep
// ramping 40 % is kept out as a ramp.
TEST(FitAdmission, DriftIsJudgedByItsEffectOnLphi) {
  lphi::segment::Sweep sweep;
  for (int i = 0; i <= 1000; ++i) {
    lphi::align::AlignedPoint p;
    p.t_s = i;
    p.field_t = -5e-3 + 1e-5 * i;
    p.temperature_k = 0.03 * (1.0 + 0.03 * (i / 1000.0 - 0.5));
    sweep.points.push_back(p);
  }
  FitRecord f = used_fit(1e-6, 1e-8, 0.0);
  f.temperature_unstable = true;  // the greedy runs broke on the drift
  lphi::live::judge_temperature(f, {&sweep}, 0.5, true);
  EXPECT_TRUE(f.used_in_dephasing) << ::testing::PrintToString(f.quality);
  EXPECT_NEAR(f.temperature_k, 0.03, 1e-9);
  EXPECT_TRUE(has_reason(f, "temperature-drift-within-error: ")) << ::testing::PrintToString(f.quality);
  EXPECT_NEAR(f.result.at("temperature_drift_k").get<double>(), 0.0009, 1e-9);

  for (auto& p : sweep.points) p.temperature_k = 0.03 * (1.0 + 0.4 * (p.t_s / 1000.0 - 0.5));
  FitRecord ramp = used_fit(1e-6, 1e-8, 0.0);
  lphi::live::judge_temperature(ramp, {&sweep}, 0.5, true);
  EXPECT_FALSE(ramp.used_in_dephasing);
  EXPECT_TRUE(has_reason(ramp, "temperature-ramp: ")) << ::testing::PrintToString(ramp.quality);

  // A stored fit (decide = false) only gets its temperature.
  FitRecord stored = used_fit(1e-6, 1e-8, 0.0);
  lphi::live::judge_temperature(stored, {&sweep}, 0.5, false);
  EXPECT_TRUE(stored.used_in_dephasing);
  EXPECT_TRUE(stored.quality.empty());
  EXPECT_NEAR(stored.temperature_k, 0.03, 1e-9);
}

// 1000 +/- 10 nm against one earlier sweep at 950 +/- 10 nm (z = 3.5):
// flagged but kept; against two, left out. 990 nm agrees (z = 1.2 with two).
TEST(FitAdmission, APlateauComparesItsSweeps) {
  std::vector<FitRecord> earlier = {used_fit(950e-9, 10e-9, 0.03)};
  FitRecord one = used_fit(1000e-9, 10e-9, 0.03);
  lphi::live::compare_with_plateau(one, earlier, 0.5);
  EXPECT_TRUE(one.used_in_dephasing);
  EXPECT_TRUE(has_reason(one, "disagrees-with-plateau: ")) << ::testing::PrintToString(one.quality);
  EXPECT_NEAR(one.result.at("plateau_z").get<double>(), 50.0 / std::sqrt(200.0), 1e-9);

  earlier.push_back(used_fit(950e-9, 10e-9, 0.0301, 7));  // another run, within 1 % in T
  FitRecord two = used_fit(1000e-9, 10e-9, 0.03);
  lphi::live::compare_with_plateau(two, earlier, 0.5);
  EXPECT_FALSE(two.used_in_dephasing);
  EXPECT_TRUE(has_reason(two, "disagrees-with-plateau: "));

  FitRecord agrees = used_fit(955e-9, 10e-9, 0.03);
  lphi::live::compare_with_plateau(agrees, earlier, 0.5);
  EXPECT_TRUE(agrees.used_in_dephasing);
  EXPECT_TRUE(agrees.quality.empty()) << ::testing::PrintToString(agrees.quality);

  // Another temperature (2 % away, another run) is not the same plateau.
  FitRecord elsewhere = used_fit(1000e-9, 10e-9, 0.0306, 3);
  lphi::live::compare_with_plateau(elsewhere, earlier, 0.5);
  EXPECT_TRUE(elsewhere.quality.empty());
}

}  // namespace
