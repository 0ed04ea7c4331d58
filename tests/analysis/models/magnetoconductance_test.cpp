// The magnetoconductance models: limits stated in analysis/PHYSICS.md (the
// sections of each model) and the papers
// named in analysis/magnetoconductance.hpp, symmetries, exact zeros, the
// gradients against central finite differences and analytic identities, an
// HLN cross-check computed from GSL's digamma, and refusal of bad input.
#include <gtest/gtest.h>

#include <cmath>
#include <functional>
#include <limits>
#include <numbers>
#include <string>
#include <vector>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_sf_psi.h>

#include "analysis/magnetoconductance.hpp"

namespace {

using namespace lphi::mc;
using std::numbers::pi;

constexpr double eps = std::numeric_limits<double>::epsilon();
constexpr double nan = std::numeric_limits<double>::quiet_NaN();
constexpr double inf = std::numeric_limits<double>::infinity();

// CODATA 2018 (exact since the 2019 SI): e and h; hbar = h/(2 pi).
constexpr double e_c = 1.602176634e-19;
constexpr double h_js = 6.62607015e-34;
constexpr double hbar_js = h_js / (2 * pi);

double rel_err(double got, double want) { return std::fabs(got - want) / std::fabs(want); }

std::vector<double> logspace(double lo, double hi, int n) {
  std::vector<double> v;
  for (int i = 0; i < n; ++i) v.push_back(std::pow(10.0, lo + (hi - lo) * i / (n - 1)));
  return v;
}

TEST(Models, NamesRoundTrip) {
  for (Model m : {Model::hln2d, Model::hln2d_so, Model::wire1d, Model::kawabata3d}) {
    const auto back = model_from_name(model_name(m));
    ASSERT_TRUE(back.has_value()) << model_name(m);
    EXPECT_EQ(*back, m);
  }
  EXPECT_EQ(model_name(Model::hln2d), "hln2d");
  EXPECT_EQ(model_name(Model::kawabata3d), "kawabata3d");
  EXPECT_FALSE(model_from_name("HLN").has_value());
  EXPECT_FALSE(model_from_name("").has_value());
}

TEST(Models, CharacteristicField) {
  // B_phi L^2 = hbar/(4e) = Phi_0/(4 pi) with the flux quantum
  // Phi_0 = h/(2e) = 2.067 833 848...e-15 Wb (CODATA 2018; quoted from memory
  // of the table, and it is what the exact h and e give). Tolerance: the
  // truncation of the 10 quoted digits.
  const double phi0 = 2.067833848e-15;
  EXPECT_LE(rel_err(characteristic_field_t(1e-6), phi0 / (4 * pi * 1e-12)), 3e-10);
  EXPECT_LE(rel_err(characteristic_field_t(1e-7), phi0 / (4 * pi * 1e-14)), 3e-10);
  for (double l : logspace(-9, -3, 13))
    EXPECT_LE(rel_err(characteristic_length_m(characteristic_field_t(l)), l), 4 * eps) << l;
  EXPECT_TRUE(std::isnan(characteristic_field_t(-1e-7)));
  EXPECT_TRUE(std::isnan(characteristic_length_m(0.0)));
}

// ---------------------------------------------------------------------------
// Exact zero at B = 0 and evenness in B, for values and gradients.

struct Case {
  std::string name;
  std::function<ModelGradient(double)> grad;
  std::function<double(double)> value;
};

std::vector<Case> all_cases() {
  return {
      {"hln2d wl", [](double b) { return hln2d_grad(b, 1.0, 3e-7); },
       [](double b) { return hln2d(b, 1.0, 3e-7); }},
      {"hln2d wal", [](double b) { return hln2d_grad(b, -0.5, 3e-7); },
       [](double b) { return hln2d(b, -0.5, 3e-7); }},
      {"hln2d_so", [](double b) { return hln2d_so_grad(b, 1e-6, 2e-7); },
       [](double b) { return hln2d_so(b, 1e-6, 2e-7); }},
      {"wire1d", [](double b) { return wire1d_grad(b, 2e-6, 1e-7); },
       [](double b) { return wire1d(b, 2e-6, 1e-7); }},
      {"wire1d_so", [](double b) { return wire1d_so_grad(b, 2e-6, 5e-7, 1e-7); },
       [](double b) { return wire1d_so(b, 2e-6, 5e-7, 1e-7); }},
      {"kawabata3d", [](double b) { return kawabata3d_grad(b, 1e-7, 2e-6); },
       [](double b) { return kawabata3d(b, 1e-7, 2e-6); }},
  };
}

TEST(Models, ExactlyZeroAtZeroField) {
  for (const Case& c : all_cases()) {
    for (double b : {0.0, -0.0}) {
      const ModelGradient g = c.grad(b);
      EXPECT_EQ(c.value(b), 0.0) << c.name;
      EXPECT_EQ(g.value, 0.0) << c.name;
      EXPECT_EQ(g.d_ln_lphi, 0.0) << c.name;
      EXPECT_EQ(g.d_ln_lso, 0.0) << c.name;
      EXPECT_EQ(g.d_alpha, 0.0) << c.name;
    }
  }
}

TEST(Models, EvenInField) {
  for (const Case& c : all_cases()) {
    for (double b : logspace(-8, 1, 19)) {
      EXPECT_EQ(c.value(b), c.value(-b)) << c.name << " B = " << b;
      const ModelGradient gp = c.grad(b), gm = c.grad(-b);
      EXPECT_EQ(gp.value, gm.value) << c.name;
      EXPECT_EQ(gp.d_ln_lphi, gm.d_ln_lphi) << c.name;
      EXPECT_EQ(gp.d_ln_lso, gm.d_ln_lso) << c.name;
      EXPECT_EQ(gp.value, c.value(b)) << c.name << " grad value differs from value";
    }
  }
}

TEST(Models, TinyFieldsStayFiniteAndPositive) {
  // Near zero field every form goes as B^2 (negative where spin-orbit
  // scattering is faster than dephasing) and must neither cancel to 0 nor
  // overflow: the ratio to B^2, the curvature, must settle. Between 1e-9 T and
  // 1e-10 T the B^4 term changes it by less than (1e-9 T/B_phi)^2 ~ 1e-6.
  for (const Case& c : all_cases()) {
    const double r1 = c.value(1e-9) / 1e-18;
    const double r2 = c.value(1e-10) / 1e-20;
    EXPECT_TRUE(std::isfinite(r2)) << c.name;
    EXPECT_NE(r2, 0.0) << c.name;
    EXPECT_LE(rel_err(r2, r1), 1e-6) << c.name;
  }
}

// ---------------------------------------------------------------------------
// HLN limits.

TEST(Hln2d, LowFieldSeries) {
  // analysis/PHYSICS.md, "2D weak localization (HLN)" (derivation):
  // B << B_phi: bracket = (B/B_phi)^2/24 - 7 (B/B_phi)^4/960,
  // error below the next term 31 (B/B_phi)^6/8064.
  const double lphi = 5e-7;
  const double bphi = characteristic_field_t(lphi);
  for (double ratio : {1e-1, 1e-2, 1e-3, 1e-5}) {
    const double b = ratio * bphi;
    const double series = ratio * ratio / 24 - 7 * std::pow(ratio, 4) / 960;
    for (double alpha : {1.0, -0.5, 0.7}) {
      EXPECT_LE(std::fabs(hln2d(b, alpha, lphi) - alpha * series),
                std::fabs(alpha) * (31 * std::pow(ratio, 6) / 8064 + 8 * eps * series))
          << ratio;
    }
  }
}

TEST(Hln2d, HighFieldLimit) {
  // analysis/PHYSICS.md, "2D weak localization (HLN)" (derivation):
  // B >> B_phi: bracket = ln(B/B_phi) + psi(1/2) + O(B_phi/B);
  // the O(B_phi/B) term is psi'(1/2) B_phi/B = (pi^2/2) B_phi/B (DLMF 5.15.3),
  // leaving an error below 8.5 (B_phi/B)^2.
  const double psi_half = -1.96351002602142347;  // DLMF 5.4.13
  const double lphi = 1e-5;
  const double bphi = characteristic_field_t(lphi);
  for (double ratio : {1e3, 1e5, 1e7}) {
    const double x = 1.0 / ratio;
    const double want = std::log(ratio) + psi_half + pi * pi / 2 * x;
    EXPECT_LE(std::fabs(hln2d(ratio * bphi, 1.0, lphi) - want), 8.5 * x * x + 16 * eps * want) << ratio;
  }
}

TEST(Hln2d, SignOfTheCorrection) {
  // alpha = +1: weak localization, Delta sigma(B > 0) > 0; alpha = -1/2:
  // antilocalization, negative magnetoconductance (Bergmann 1984).
  for (double b : logspace(-6, 1, 15)) {
    EXPECT_GT(hln2d(b, 1.0, 2e-7), 0.0) << b;
    EXPECT_LT(hln2d(b, -0.5, 2e-7), 0.0) << b;
  }
}

TEST(Hln2d, AgreesWithGslDigamma) {
  // Delta sigma = alpha [psi(1/2 + B_phi/B) - ln(B_phi/B)] with GSL's psi
  // where x = B_phi/B <= 4: the difference cancels by at most ~250x there, so
  // the tolerance is GSL's error estimate plus 8 eps of the two terms.
  gsl_set_error_handler_off();
  const double lphi = 1e-7;
  const double bphi = hbar_js / (4 * e_c * lphi * lphi);
  for (double b : logspace(std::log10(bphi / 4), 1, 40)) {
    const double x = bphi / b;
    gsl_sf_result psi;
    ASSERT_EQ(gsl_sf_psi_e(0.5 + x, &psi), GSL_SUCCESS);
    const double want = 0.8 * (psi.val - std::log(x));
    const double tol = 0.8 * (2 * psi.err + 8 * eps * (std::fabs(psi.val) + std::fabs(std::log(x))));
    EXPECT_LE(std::fabs(hln2d(b, 0.8, lphi) - want), tol) << "B = " << b;
  }
}

// ---------------------------------------------------------------------------
// Spin-orbit limits.

TEST(Hln2dSo, NoSpinOrbitIsWeakLocalization) {
  // B_so -> 0 gives hln2d with alpha = +1 (HLN 1980). With L_so = +infinity
  // exactly; with L_so = 1e3 L_phi the difference is ~2 (B_so/B) |b'(x)| <=
  // 4 (L_phi/L_so)^2 |b| (|x b'/b| <= 2), i.e. relative 4e-6.
  const double lphi = 3e-7;
  for (double b : logspace(-6, 1, 15)) {
    EXPECT_LE(rel_err(hln2d_so(b, lphi, inf), hln2d(b, 1.0, lphi)), 4 * eps) << b;
    EXPECT_LE(rel_err(hln2d_so(b, lphi, 1e3 * lphi), hln2d(b, 1.0, lphi)), 4e-6) << b;
  }
}

TEST(Hln2dSo, StrongSpinOrbitIsAntilocalization) {
  // B_so -> infinity gives alpha = -1/2. The two spin-orbit terms b(x1) +
  // b(x2)/2 are then tiny; each b(x) <= 1/(24 x^2) (the first term of its
  // alternating expansion), which bounds the difference.
  const double lphi = 1e-6, lso = 1e-9;
  const double bphi = characteristic_field_t(lphi), bso = characteristic_field_t(lso);
  for (double b : logspace(-6, -1, 11)) {
    const double x1 = (bphi + bso) / b, x2 = (bphi + 2 * bso) / b;
    const double bound = 1 / (24 * x1 * x1) + 1 / (48 * x2 * x2);
    const double want = hln2d(b, -0.5, lphi);
    EXPECT_LE(std::fabs(hln2d_so(b, lphi, lso) - want), bound + 8 * eps * std::fabs(want)) << b;
    EXPECT_LT(hln2d_so(b, lphi, lso), 0.0);
  }
}

TEST(Hln2dSo, CrossoverFromLocalizationToAntilocalization) {
  // With L_so < L_phi the correction is negative at low field (spin-orbit
  // scattering acts first) and turns positive once B >> B_so (Bergmann 1984).
  const double lphi = 1e-6, lso = 1e-7;
  EXPECT_LT(hln2d_so(0.1 * characteristic_field_t(lphi), lphi, lso), 0.0);
  EXPECT_GT(hln2d_so(1e3 * characteristic_field_t(lso), lphi, lso), 0.0);
}

// ---------------------------------------------------------------------------
// Wire.

TEST(Wire1d, LowFieldQuadraticLaw) {
  // [derived] With u = L_phi^2/L_B^2 = L_phi^2 e^2 w^2 B^2/(3 hbar^2):
  // L_phi - (1/L_phi^2 + 1/L_B^2)^(-1/2) = L_phi (u/2 - 3u^2/8 + ...), so
  // Delta sigma = (2 pi/w) L_phi^3 / (2 L_B^2) (1 - 3u/4 + ...); the relative
  // error of the quadratic law is below u. The smallest fields test that the
  // value is not lost to cancellation (the literal form gives 0 there).
  const double lphi = 2e-6, w = 5e-8;
  for (double b : {1e-12, 1e-9, 1e-6, 1e-4}) {
    const double inv_lb2 = e_c * e_c * w * w * b * b / (3 * hbar_js * hbar_js);
    const double u = lphi * lphi * inv_lb2;
    const double law = (2 * pi / w) * lphi * lphi * lphi * inv_lb2 / 2;
    EXPECT_LE(rel_err(wire1d(b, lphi, w), law), u + 16 * eps) << b;
  }
}

TEST(Wire1d, HighFieldSaturates) {
  // L_B -> 0: Delta sigma -> (2 pi/w) L_phi, approached as (2 pi/w) (L_phi - L_B).
  const double lphi = 2e-6, w = 5e-8, b = 1e3;
  const double lb = std::sqrt(3.0) * hbar_js / (e_c * w * b);
  EXPECT_LE(rel_err(wire1d(b, lphi, w), (2 * pi / w) * (lphi - lb)), (lb / lphi) * (lb / lphi));
}

TEST(Wire1dSo, Limits) {
  // L_so -> infinity reproduces wire1d exactly in form; L_so -> 0 leaves
  // -(1/2) of it (Pierre et al. 2003): the triplet term is then bounded by
  // (3/2)(2 pi/w) k / (2 q^(3/2)), q = 4/(3 L_so^2) + 1/L_phi^2, k = 1/L_B^2.
  const double lphi = 2e-6, w = 5e-8;
  for (double b : logspace(-6, 1, 15)) {
    EXPECT_LE(rel_err(wire1d_so(b, lphi, inf, w), wire1d(b, lphi, w)), 4 * eps) << b;
    const double lso = 1e-10;
    const double q = 4 / (3 * lso * lso) + 1 / (lphi * lphi);
    const double k = e_c * e_c * w * w * b * b / (3 * hbar_js * hbar_js);
    const double bound = 1.5 * (2 * pi / w) * k / (2 * q * std::sqrt(q));
    const double want = -0.5 * wire1d(b, lphi, w);
    EXPECT_LE(std::fabs(wire1d_so(b, lphi, lso, w) - want), bound + 8 * eps * std::fabs(want)) << b;
  }
}

// ---------------------------------------------------------------------------
// Kawabata.

TEST(Kawabata3d, Limits) {
  // Delta sigma_sq = t sqrt(eB/hbar) f3(B_phi/B) in e^2/(pi h) (Kawabata 1980).
  // Low field, f3(d) ~ d^(-3/2)/48: Delta sigma = t sqrt(e/hbar) B^2 / (48 B_phi^(3/2)),
  // next relative term -(7/64) d^(-2). High field, f3(0) = 0.604898643421630.
  const double lphi = 1e-7, t = 2e-6;
  const double bphi = characteristic_field_t(lphi);
  for (double ratio : {1e-2, 1e-4}) {
    const double b = ratio * bphi;
    const double law = t * std::sqrt(e_c / hbar_js) * b * b / (48 * bphi * std::sqrt(bphi));
    EXPECT_LE(rel_err(kawabata3d(b, lphi, t), law), 0.11 * ratio * ratio + 16 * eps) << ratio;
  }
  // Near d = 0, f3(d) = f3(0) - 2 sqrt(d) + d zeta(3/2, 1/2)/2 + ... (from the
  // closed form; zeta(3/2, 1/2) = (2^(3/2) - 1) zeta(3/2) = 4.78, DLMF 25.11.11),
  // so the two-term form is good to 2.4 d absolute.
  const double d = 1e-7;
  const double b = bphi / d;
  const double high = t * std::sqrt(e_c * b / hbar_js) * (0.604898643421630 - 2 * std::sqrt(d));
  EXPECT_LE(rel_err(kawabata3d(b, lphi, t), high), 2.4 * d / 0.6 + 1e-14);
}

// ---------------------------------------------------------------------------
// Gradients: central finite differences in ln L (step 1e-5: truncation
// ~h^2 |f'''|/6 ~ 1e-10 of the size of the value, rounding ~eps/h = 2e-11),
// hence the tolerance 1e-7 of max(|derivative|, |value|).

void expect_gradient_matches(const std::string& what, const std::function<double(double, double)>& f,
                             double lphi, double lso, const ModelGradient& g) {
  const double h = 1e-5;
  const double fd_phi = (f(lphi * std::exp(h), lso) - f(lphi * std::exp(-h), lso)) / (2 * h);
  const double scale = std::max(std::fabs(g.value), std::fabs(g.d_ln_lphi));
  EXPECT_LE(std::fabs(fd_phi - g.d_ln_lphi), 1e-7 * scale) << what << " d/d ln L_phi";
  if (std::isfinite(lso)) {
    const double fd_so = (f(lphi, lso * std::exp(h)) - f(lphi, lso * std::exp(-h))) / (2 * h);
    const double scale_so = std::max(std::fabs(g.value), std::fabs(g.d_ln_lso));
    EXPECT_LE(std::fabs(fd_so - g.d_ln_lso), 1e-7 * scale_so) << what << " d/d ln L_so";
  }
}

TEST(Gradients, AgainstCentralDifferences) {
  for (double b : logspace(-6, 1, 15)) {
    for (double lphi : {1e-8, 1e-7, 1e-6, 1e-5, 1e-4}) {
      const std::string at = " B = " + std::to_string(b) + " L_phi = " + std::to_string(lphi);
      for (double alpha : {1.0, -0.5}) {
        const ModelGradient g = hln2d_grad(b, alpha, lphi);
        expect_gradient_matches("hln2d" + at, [&](double l, double) { return hln2d(b, alpha, l); }, lphi,
                                inf, g);
        EXPECT_EQ(g.d_alpha, hln2d(b, 1.0, lphi));  // linear in alpha
        EXPECT_EQ(g.d_ln_lso, 0.0);
      }
      for (double lso : {1e-8, 1e-7, 1e-6, 1e-5}) {
        expect_gradient_matches("hln2d_so" + at, [&](double l, double s) { return hln2d_so(b, l, s); },
                                lphi, lso, hln2d_so_grad(b, lphi, lso));
        expect_gradient_matches("wire1d_so" + at,
                                [&](double l, double s) { return wire1d_so(b, l, s, 1e-7); }, lphi, lso,
                                wire1d_so_grad(b, lphi, lso, 1e-7));
        EXPECT_EQ(hln2d_so_grad(b, lphi, lso).d_alpha, 0.0);
      }
      const ModelGradient gw = wire1d_grad(b, lphi, 1e-7);
      expect_gradient_matches("wire1d" + at, [&](double l, double) { return wire1d(b, l, 1e-7); }, lphi,
                              inf, gw);
      EXPECT_EQ(gw.d_ln_lso, 0.0);
      const ModelGradient gk = kawabata3d_grad(b, lphi, 1e-6);
      expect_gradient_matches("kawabata3d" + at, [&](double l, double) { return kawabata3d(b, l, 1e-6); },
                              lphi, inf, gk);
      EXPECT_EQ(gk.d_ln_lso, 0.0);
    }
  }
}

TEST(Gradients, ScaleInvarianceIdentities) {
  // [derived] The 2D and 3D forms depend on L_phi only through B_phi/B
  // ~ 1/(B L_phi^2): for hln2d, d/d ln L_phi = 2 d/d ln B, and for hln2d_so
  // (which depends on B L_phi^2 and B L_so^2) d/d ln L_phi + d/d ln L_so =
  // 2 d/d ln B. For the wire, sigma w/(2 pi L_phi) depends on L_phi B only:
  // d/d ln L_phi = value + d/d ln B. d/d ln B by central differences as above.
  const double h = 1e-5;
  auto d_ln_b = [&](const std::function<double(double)>& f, double b) {
    return (f(b * std::exp(h)) - f(b * std::exp(-h))) / (2 * h);
  };
  for (double b : logspace(-5, 0, 6)) {
    const ModelGradient g = hln2d_grad(b, 1.0, 3e-7);
    EXPECT_LE(std::fabs(g.d_ln_lphi - 2 * d_ln_b([](double bb) { return hln2d(bb, 1.0, 3e-7); }, b)),
              1e-7 * std::max(g.value, std::fabs(g.d_ln_lphi)));
    const ModelGradient s = hln2d_so_grad(b, 3e-7, 1e-7);
    const double rhs = 2 * d_ln_b([](double bb) { return hln2d_so(bb, 3e-7, 1e-7); }, b);
    EXPECT_LE(std::fabs(s.d_ln_lphi + s.d_ln_lso - rhs),
              1e-7 * std::max({std::fabs(s.value), std::fabs(s.d_ln_lphi), std::fabs(s.d_ln_lso)}));
    const ModelGradient w = wire1d_grad(b, 2e-6, 5e-8);
    EXPECT_LE(std::fabs(w.d_ln_lphi - w.value - d_ln_b([](double bb) { return wire1d(bb, 2e-6, 5e-8); }, b)),
              1e-7 * std::max(w.value, w.d_ln_lphi));
    const ModelGradient k = kawabata3d_grad(b, 1e-7, 1e-6);
    // sigma / sqrt(B) depends on B L_phi^2 only: d/d ln L_phi = 2 d/d ln B - value.
    EXPECT_LE(std::fabs(k.d_ln_lphi - 2 * d_ln_b([](double bb) { return kawabata3d(bb, 1e-7, 1e-6); }, b) +
                        k.value),
              1e-7 * std::max(k.value, std::fabs(k.d_ln_lphi)));
  }
}

TEST(Gradients, HlnAgainstGslTrigamma) {
  // d/d ln L_phi [alpha b(x)] = -2 alpha x b'(x) = -2 alpha (x psi'(1/2 + x) - 1)
  // with GSL's psi' (x <= 4, where x psi' - 1 cancels by at most ~40x).
  gsl_set_error_handler_off();
  const double lphi = 1e-7;
  const double bphi = characteristic_field_t(lphi);
  for (double b : logspace(std::log10(bphi / 4), 1, 30)) {
    const double x = bphi / b;
    gsl_sf_result psi1;
    ASSERT_EQ(gsl_sf_psi_1_e(0.5 + x, &psi1), GSL_SUCCESS);
    const double want = -2 * 0.7 * (x * psi1.val - 1);
    const double tol = 2 * 0.7 * (2 * x * psi1.err + 8 * eps * (x * psi1.val + 1));
    EXPECT_LE(std::fabs(hln2d_grad(b, 0.7, lphi).d_ln_lphi - want), tol) << "B = " << b;
  }
}

// ---------------------------------------------------------------------------
// Bad input: NaN (never a silent zero), and parameter_error says what is wrong.

TEST(BadInput, ReturnsNan) {
  EXPECT_TRUE(std::isnan(hln2d(0.1, 1.0, -1e-7)));
  EXPECT_TRUE(std::isnan(hln2d(0.1, 1.0, 0.0)));
  EXPECT_TRUE(std::isnan(hln2d(0.1, 1.0, inf)));
  EXPECT_TRUE(std::isnan(hln2d(0.1, nan, 1e-7)));
  EXPECT_TRUE(std::isnan(hln2d(nan, 1.0, 1e-7)));
  EXPECT_TRUE(std::isnan(hln2d(inf, 1.0, 1e-7)));
  EXPECT_TRUE(std::isnan(hln2d(0.0, 1.0, nan)));  // even at B = 0
  EXPECT_TRUE(std::isnan(hln2d_grad(0.1, 1.0, -1.0).d_ln_lphi));
  EXPECT_TRUE(std::isnan(hln2d_so(0.1, 1e-7, 0.0)));
  EXPECT_TRUE(std::isnan(hln2d_so(0.1, 1e-7, nan)));
  EXPECT_TRUE(std::isnan(hln2d_so_grad(0.1, nan, 1e-7).value));
  EXPECT_TRUE(std::isnan(wire1d(0.1, 1e-6, 0.0)));
  EXPECT_TRUE(std::isnan(wire1d(0.1, 1e-6, -1e-7)));
  EXPECT_TRUE(std::isnan(wire1d_grad(0.1, 0.0, 1e-7).value));
  EXPECT_TRUE(std::isnan(wire1d_so(0.1, 1e-6, -1e-7, 1e-7)));
  EXPECT_TRUE(std::isnan(wire1d_so_grad(0.1, 1e-6, 1e-7, nan).d_ln_lso));
  EXPECT_TRUE(std::isnan(kawabata3d(0.1, 1e-7, 0.0)));
  EXPECT_TRUE(std::isnan(kawabata3d_grad(0.1, -1e-7, 1e-6).value));
}

TEST(BadInput, ParameterErrorNamesTheArgument) {
  EXPECT_EQ(parameter_error(Model::hln2d, 0.1, 1.0, 1e-7, 0.0, 0.0), "");
  EXPECT_EQ(parameter_error(Model::hln2d_so, 0.1, 1.0, 1e-7, 1e-7, 0.0), "");
  EXPECT_EQ(parameter_error(Model::hln2d_so, 0.1, 1.0, 1e-7, inf, 0.0), "");
  EXPECT_EQ(parameter_error(Model::wire1d, 0.1, 1.0, 1e-6, 0.0, 1e-7), "");
  EXPECT_EQ(parameter_error(Model::kawabata3d, -2.0, 1.0, 1e-7, 0.0, 1e-6), "");

  const std::string lphi = parameter_error(Model::hln2d, 0.1, 1.0, -1e-7, 0.0, 0.0);
  EXPECT_NE(lphi.find("lphi_m"), std::string::npos) << lphi;
  EXPECT_NE(lphi.find("-1e-07"), std::string::npos) << lphi;
  EXPECT_NE(parameter_error(Model::hln2d, nan, 1.0, 1e-7, 0.0, 0.0).find("field_t"), std::string::npos);
  EXPECT_NE(parameter_error(Model::hln2d, 0.1, inf, 1e-7, 0.0, 0.0).find("alpha"), std::string::npos);
  EXPECT_NE(parameter_error(Model::hln2d_so, 0.1, 1.0, 1e-7, 0.0, 0.0).find("lso_m"), std::string::npos);
  EXPECT_NE(parameter_error(Model::wire1d, 0.1, 1.0, 1e-6, 0.0, 0.0).find("width_m"), std::string::npos);
  EXPECT_NE(parameter_error(Model::wire1d, 0.1, 1.0, 1e-6, -1.0, 1e-7).find("lso_m"), std::string::npos);
  EXPECT_NE(parameter_error(Model::kawabata3d, 0.1, 1.0, 1e-7, 0.0, nan).find("thickness_m"),
            std::string::npos);
}

}  // namespace
