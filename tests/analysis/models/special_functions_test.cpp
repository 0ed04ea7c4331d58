// digamma, trigamma, the weak-localization bracket, Hurwitz zeta(1/2, a) and
// Kawabata's f3 against published identities and tables (DLMF, Abramowitz &
// Stegun) and against GSL (libgsl-dev), an independent implementation.
// DLMF equation numbers are quoted from memory; the identities themselves are
// standard, and each one tested here also holds to 1e-25 in mpmath.
#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <numbers>
#include <vector>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_sf_psi.h>
#include <gsl/gsl_sf_zeta.h>

#include "analysis/internal/special_functions.hpp"

namespace {

using namespace lphi::special;
using std::numbers::egamma;
using std::numbers::ln2;
using std::numbers::pi;

constexpr double eps = std::numeric_limits<double>::epsilon();

double rel_err(double got, double want) { return std::fabs(got - want) / std::fabs(want); }

std::vector<double> logspace(double lo, double hi, int n) {
  std::vector<double> v;
  for (int i = 0; i < n; ++i) v.push_back(std::pow(10.0, lo + (hi - lo) * i / (n - 1)));
  return v;
}

// ---------------------------------------------------------------------------
// digamma and trigamma. Boost documents errors of a few eps for double; the
// identities below are checked to 8 eps, the tables to their printed digits.

TEST(Digamma, SpecialValuesDlmf) {
  // DLMF 5.4.12: psi(1) = -gamma.
  EXPECT_LE(rel_err(digamma(1.0), -egamma), 8 * eps);
  // DLMF 5.4.13: psi(1/2) = -gamma - 2 ln 2 = -1.96351002602142347.
  EXPECT_LE(rel_err(digamma(0.5), -egamma - 2 * ln2), 8 * eps);
  EXPECT_NEAR(digamma(0.5), -1.96351002602142347, 8 * eps * 2);
  // DLMF 5.4.14 with n = 1: psi(3/2) = -gamma - 2 ln 2 + 2.
  // The reference itself cancels ~55x (terms of size 2 give 0.036).
  EXPECT_LE(rel_err(digamma(1.5), 2.0 - egamma - 2 * ln2), 64 * eps);
}

TEST(Digamma, RecurrenceDlmf552) {
  // DLMF 5.5.2: psi(z + 1) = psi(z) + 1/z. The difference of two values of
  // size |psi| carries their rounding, hence the scale |psi(z)| + 1/z.
  for (double z : logspace(-2, 3, 101)) {
    const double lhs = digamma(z + 1.0) - digamma(z);
    const double scale = std::fabs(digamma(z)) + 1.0 / z;
    EXPECT_LE(std::fabs(lhs - 1.0 / z), 8 * eps * scale) << "z = " << z;
  }
}

TEST(Trigamma, SpecialValuesDlmf) {
  // DLMF 5.15.2 / zeta(2) (DLMF 25.6.1): psi'(1) = pi^2/6.
  EXPECT_LE(rel_err(trigamma(1.0), pi * pi / 6.0), 8 * eps);
  // DLMF 5.15.3: psi'(1/2) = pi^2/2.
  EXPECT_LE(rel_err(trigamma(0.5), pi * pi / 2.0), 8 * eps);
}

TEST(Trigamma, RecurrenceDlmf5155) {
  // DLMF 5.15.5: psi'(z + 1) = psi'(z) - 1/z^2.
  for (double z : logspace(-2, 3, 101)) {
    const double lhs = trigamma(z + 1.0) - trigamma(z);
    const double scale = trigamma(z) + 1.0 / (z * z);
    EXPECT_LE(std::fabs(lhs + 1.0 / (z * z)), 8 * eps * scale) << "z = " << z;
  }
}

TEST(Digamma, AbramowitzStegunTable61) {
  // Abramowitz & Stegun, Table 6.1 (psi and psi' to 10 decimals). Values
  // quoted from memory of the table and confirmed digit by digit with mpmath
  // at 30 digits (mpmath.digamma, mpmath.psi(1, x)). Tolerance: half a unit in
  // the 10th decimal, the rounding of the printed table.
  struct Entry {
    double x, psi, psi1;
  };
  const Entry table[] = {
      {1.1, -0.4237549404, 1.4332991508},
      {1.2, -0.2890398966, 1.2673772054},
      {1.25, -0.2274535334, 1.1973291545},
      {1.5, 0.0364899740, 0.9348022005},
      {1.75, 0.2474724535, 0.7641018699},
      {2.0, 0.4227843351, 0.6449340668},
  };
  for (const Entry& e : table) {
    EXPECT_NEAR(digamma(e.x), e.psi, 0.5e-10 + 4 * eps) << "x = " << e.x;
    EXPECT_NEAR(trigamma(e.x), e.psi1, 0.5e-10 + 4 * eps) << "x = " << e.x;
  }
}

TEST(Digamma, AgreesWithGsl) {
  // gsl_sf_psi_e / gsl_sf_psi_1_e return GSL's own error estimate; lphi's value
  // must lie within that estimate plus lphi's few eps.
  gsl_set_error_handler_off();
  for (double x : logspace(-3, 6, 181)) {
    gsl_sf_result psi, psi1;
    ASSERT_EQ(gsl_sf_psi_e(x, &psi), GSL_SUCCESS);
    ASSERT_EQ(gsl_sf_psi_1_e(x, &psi1), GSL_SUCCESS);
    EXPECT_LE(std::fabs(digamma(x) - psi.val), 2 * psi.err + 8 * eps * std::fabs(psi.val)) << x;
    EXPECT_LE(std::fabs(trigamma(x) - psi1.val), 2 * psi1.err + 8 * eps * psi1.val) << x;
  }
}

TEST(Digamma, OutsideDomainIsNan) {
  const double nan = std::numeric_limits<double>::quiet_NaN();
  EXPECT_TRUE(std::isnan(digamma(0.0)));
  EXPECT_TRUE(std::isnan(digamma(-1.5)));
  EXPECT_TRUE(std::isnan(digamma(nan)));
  EXPECT_TRUE(std::isnan(trigamma(0.0)));
  EXPECT_TRUE(std::isnan(trigamma(-2.0)));
  EXPECT_TRUE(std::isnan(trigamma(nan)));
}

// ---------------------------------------------------------------------------
// The bracket b(x) = psi(1/2 + x) - ln x.

TEST(WlBracket, LowFieldSeries) {
  // analysis/PHYSICS.md, "2D weak localization (HLN)" / DLMF 5.11.2 with
  // h = 1/2: b = 1/(24 x^2) - 7/(960 x^4) + ...
  // The next term 31/(8064 x^6) bounds the error of the two-term form.
  for (double x : {20.0, 100.0, 1e3, 1e5, 1e8, 1e12}) {
    const double series = 1.0 / (24 * x * x) - 7.0 / (960 * std::pow(x, 4));
    const double next = 31.0 / (8064 * std::pow(x, 6));
    EXPECT_LE(std::fabs(wl_bracket(x) - series), 1.01 * next + 4 * eps * series) << "x = " << x;
  }
}

TEST(WlBracket, HighFieldLimit) {
  // B >> B_phi: b = -ln x + psi(1/2) + x psi'(1/2) + O(x^2) (Taylor expansion
  // of psi about 1/2, psi'(1/2) = pi^2/2 by DLMF 5.15.3). The remainder
  // x^2 |psi''(1/2)|/2 = 8.41 x^2 bounds the error.
  const double psi_half = -egamma - 2 * ln2;
  for (double x : {1e-8, 1e-6, 1e-4, 1e-3}) {
    const double approx = -std::log(x) + psi_half + x * pi * pi / 2;
    EXPECT_LE(std::fabs(wl_bracket(x) - approx), 8.5 * x * x + 8 * eps * std::fabs(approx))
        << "x = " << x;
  }
}

TEST(WlBracket, PositiveAndDecreasing) {
  // b > 0 and db/dx < 0 for all x > 0 (analysis/PHYSICS.md, "2D weak
  // localization (HLN)": the bracket grows with B).
  for (double x : logspace(-6, 15, 400)) {
    EXPECT_GT(wl_bracket(x), 0.0) << x;
    EXPECT_LT(wl_bracket_derivative(x), 0.0) << x;
    EXPECT_LT(wl_bracket_and_log_slope(x).log_slope, 0.0) << x;
  }
}

TEST(WlBracket, AgreesWithGslWhereTheDifferenceDoesNotCancel) {
  // For x <= 4 the direct difference loses at most a factor ~250 (b(4) = 2.5e-3
  // against psi(4.5) = 1.39), so GSL's psi gives an independent value good to
  // ~1e-13 there.
  gsl_set_error_handler_off();
  for (double x : logspace(-3, std::log10(4.0), 80)) {
    gsl_sf_result psi;
    ASSERT_EQ(gsl_sf_psi_e(0.5 + x, &psi), GSL_SUCCESS);
    const double want = psi.val - std::log(x);
    const double floor = 2 * psi.err + 8 * eps * (std::fabs(psi.val) + std::fabs(std::log(x)));
    EXPECT_LE(std::fabs(wl_bracket(x) - want), floor) << "x = " << x;
    gsl_sf_result psi1;
    ASSERT_EQ(gsl_sf_psi_1_e(0.5 + x, &psi1), GSL_SUCCESS);
    const double want_d = psi1.val - 1.0 / x;
    EXPECT_LE(std::fabs(wl_bracket_derivative(x) - want_d), 2 * psi1.err + 8 * eps * (psi1.val + 1.0 / x))
        << "x = " << x;
  }
}

TEST(WlBracket, DerivativeConsistentWithValueAcrossTheCrossover) {
  // The value and the derivative switch from the direct formula to the series
  // somewhere in [2, 40]; scanning that range, the central difference of the
  // value must match the returned derivative. With h = 1e-4 x the truncation
  // error is ~2 (h/x)^2 = 2e-8 relative (b ~ x^-2), rounding ~1e-12.
  // (The absolute accuracy at the crossover is checked in the mpmath table.)
  for (double x = 2.0; x < 40.0; x *= 1.0 + 1e-3) {
    const double h = x * 1e-4;
    const double slope = (wl_bracket(x + h) - wl_bracket(x - h)) / (2 * h);
    EXPECT_LE(std::fabs(slope - wl_bracket_derivative(x)), 1e-7 * std::fabs(wl_bracket_derivative(x)))
        << "x = " << x;
  }
}

TEST(WlBracket, LogSlopeMatchesDerivative) {
  for (double x : logspace(-3, 8, 200)) {
    const BracketAndSlope b = wl_bracket_and_log_slope(x);
    EXPECT_EQ(b.value, wl_bracket(x)) << x;
    // Below the crossover x psi'(1/2 + x) - 1 and x (psi' - 1/x) round
    // differently after cancelling terms of size 1, hence the "+ 1".
    EXPECT_LE(std::fabs(b.log_slope - x * wl_bracket_derivative(x)), 4 * eps * (std::fabs(b.log_slope) + 1))
        << x;
  }
  // Where db/dx underflows the logarithmic slope still holds: x db/dx -> -1/(12 x^2).
  const double x = 1e120;
  EXPECT_LE(rel_err(wl_bracket_and_log_slope(x).log_slope, -1.0 / (12 * x * x)), 1e-14);
}

TEST(WlBracket, EdgesOfTheDomain) {
  EXPECT_EQ(wl_bracket(std::numeric_limits<double>::infinity()), 0.0);
  EXPECT_EQ(wl_bracket_derivative(std::numeric_limits<double>::infinity()), 0.0);
  EXPECT_TRUE(std::isnan(wl_bracket(0.0)));
  EXPECT_TRUE(std::isnan(wl_bracket(-1.0)));
  EXPECT_TRUE(std::isnan(wl_bracket(std::numeric_limits<double>::quiet_NaN())));
  EXPECT_TRUE(std::isnan(wl_bracket_derivative(0.0)));
  EXPECT_TRUE(std::isnan(wl_bracket_and_log_slope(-3.0).value));
}

// ---------------------------------------------------------------------------
// The two-argument forms wl_bracket_and_log_slope(x, ln x), wl_bracket(x, ln x)
// and the sweep form, which the fits call with ln x = ln B_phi - ln|B|
// assembled from precomputed logarithms. GSL's psi and psi_1 (gsl_sf_psi_e,
// gsl_sf_psi_1_e, an independent implementation with its own error
// estimates) check them over the whole range below the crossover and across
// it. Tolerance: the terms that are added, psi(1/2 + x), ln x and for the
// slope x psi'(1/2 + x) and 1, are each good to a few eps (GSL's err plus
// 16 eps); what the difference then loses to cancellation no implementation
// in double can recover, so the bound is relative to the sum of the
// magnitudes of the terms, plus ln(x + 8) for the size of the terms a
// digamma implementation sums internally (recurrence steps), which matters
// near psi's zero at 1/2 + x = 1.4616 (DLMF 5.4.19) where |psi| + |ln x| ~ 0.

TEST(WlBracketWithLog, AgreesWithGslPsiAndPsi1) {
  gsl_set_error_handler_off();
  std::vector<double> xs = logspace(-8, std::log10(8.0), 400);
  for (double x = 7.0; x < 9.0; x += 1.0 / 64) xs.push_back(x);  // across the crossover
  for (double x : xs) {
    const double ln_x = std::log(x);
    gsl_sf_result psi, psi1;
    ASSERT_EQ(gsl_sf_psi_e(0.5 + x, &psi), GSL_SUCCESS);
    ASSERT_EQ(gsl_sf_psi_1_e(0.5 + x, &psi1), GSL_SUCCESS);
    const BracketAndSlope b = wl_bracket_and_log_slope(x, ln_x);
    const double terms = std::fabs(psi.val) + std::fabs(ln_x) + std::log(x + 8.0);
    EXPECT_LE(std::fabs(b.value - (psi.val - ln_x)), 2 * psi.err + 16 * eps * terms) << "x = " << x;
    const double slope_terms = x * psi1.val + 1.0;
    EXPECT_LE(std::fabs(b.log_slope - (x * psi1.val - 1.0)), 2 * x * psi1.err + 16 * eps * slope_terms)
        << "x = " << x;
    EXPECT_EQ(wl_bracket(x, ln_x), b.value) << "x = " << x;
  }
}

TEST(WlBracketWithLog, AgreesWithTheOneArgumentForm) {
  // With ln x supplied the result may differ from the one-argument form only
  // by the rounding of ln x (held to the bound above) below the crossover,
  // and not at all above it, where neither uses ln x.
  for (double x : logspace(-12, 12, 2000)) {
    const BracketAndSlope fast = wl_bracket_and_log_slope(x, std::log(x));
    const BracketAndSlope boost = wl_bracket_and_log_slope(x);
    if (x >= 8.0) {
      EXPECT_EQ(fast.value, boost.value) << x;
      EXPECT_EQ(fast.log_slope, boost.log_slope) << x;
      continue;
    }
    const double terms = std::fabs(boost.value) + 2 * std::fabs(std::log(x)) + 2.0;
    EXPECT_LE(std::fabs(fast.value - boost.value), 16 * eps * terms) << x;
    EXPECT_LE(std::fabs(fast.log_slope - boost.log_slope), 16 * eps * (std::fabs(boost.log_slope) + 2.0))
        << x;
  }
}

TEST(WlBracketWithLog, SweepFormMatchesPointByPoint) {
  // x_i = scale * factor_i with ln x_i = ln_scale + ln_factor_i; a zero field
  // (factor = +infinity) gives exactly {0, 0}, the B -> 0 limit of the models.
  const double inf = std::numeric_limits<double>::infinity();
  const double scale = 4.1e-3;
  std::vector<double> factor, ln_factor;
  for (double b : logspace(-7, 1, 300)) {
    factor.push_back(1.0 / b);
    ln_factor.push_back(-std::log(b));
  }
  factor.push_back(inf);
  ln_factor.push_back(inf);
  std::vector<BracketAndSlope> out(factor.size());
  wl_bracket_and_log_slope(scale, std::log(scale), factor, ln_factor, out);
  for (std::size_t i = 0; i + 1 < factor.size(); ++i) {
    const BracketAndSlope one = wl_bracket_and_log_slope(scale * factor[i], std::log(scale) + ln_factor[i]);
    EXPECT_EQ(out[i].value, one.value) << i;
    EXPECT_EQ(out[i].log_slope, one.log_slope) << i;
  }
  EXPECT_EQ(out.back().value, 0.0);
  EXPECT_EQ(out.back().log_slope, 0.0);
}

TEST(WlBracketWithLog, EdgesOfTheDomain) {
  const double nan = std::numeric_limits<double>::quiet_NaN();
  EXPECT_TRUE(std::isnan(wl_bracket_and_log_slope(0.0, 0.0).value));
  EXPECT_TRUE(std::isnan(wl_bracket_and_log_slope(-1.0, 0.0).log_slope));
  EXPECT_TRUE(std::isnan(wl_bracket_and_log_slope(nan, 0.0).value));
  EXPECT_TRUE(std::isnan(wl_bracket(-2.0, 0.0)));
  EXPECT_EQ(wl_bracket(std::numeric_limits<double>::infinity(), 0.0), 0.0);
  // Just below and at the crossover (x = 8) the two branches meet: the
  // direct difference and the series agree to the bound used above.
  const double below = std::nextafter(8.0, 0.0);
  const BracketAndSlope a = wl_bracket_and_log_slope(below, std::log(below));
  const BracketAndSlope b = wl_bracket_and_log_slope(8.0, std::log(8.0));
  EXPECT_LE(std::fabs(a.value - b.value), 16 * eps * (2 * std::log(8.0) + 2.0));
  EXPECT_LE(std::fabs(a.log_slope - b.log_slope), 16 * eps * 2.0);
}

// ---------------------------------------------------------------------------
// Hurwitz zeta(1/2, a) and f3.

// zeta(1/2) = -1.4603545088095868129 (mpmath.zeta(0.5) at 30 digits; GSL
// gsl_sf_zeta(0.5) below gives the same independently).
constexpr double zeta_half = -1.4603545088095868129;

TEST(HurwitzZeta, RiemannZetaAtHalf) {
  // zeta(1/2, 1) = zeta(1/2) (DLMF 25.11.2), checked against GSL's Riemann zeta.
  gsl_set_error_handler_off();
  gsl_sf_result z;
  ASSERT_EQ(gsl_sf_zeta_e(0.5, &z), GSL_SUCCESS);
  EXPECT_LE(std::fabs(zeta_half - z.val), 2 * z.err + 4 * eps);
  EXPECT_LE(rel_err(hurwitz_zeta_half(1.0), zeta_half), 8 * eps);
  // DLMF 25.11.11: zeta(s, 1/2) = (2^s - 1) zeta(s).
  // The Euler-Maclaurin sum cancels ~10x to reach -0.6 here.
  EXPECT_LE(rel_err(hurwitz_zeta_half(0.5), (std::sqrt(2.0) - 1.0) * zeta_half), 32 * eps);
}

TEST(HurwitzZeta, ShiftRecurrenceDlmf25113) {
  // DLMF 25.11.3: zeta(s, a) = zeta(s, a + 1) + a^(-s).
  for (double a : logspace(-3, 8, 120)) {
    const double lhs = hurwitz_zeta_half(a);
    const double rhs = hurwitz_zeta_half(a + 1.0) + 1.0 / std::sqrt(a);
    const double scale = std::fabs(hurwitz_zeta_half(a + 1.0)) + 1.0 / std::sqrt(a);
    EXPECT_LE(std::fabs(lhs - rhs), 1e-14 * scale) << "a = " << a;
  }
}

TEST(KawabataF3, ValueAtZero) {
  // f3(0) = (sqrt 2 - 1)|zeta(1/2)| = 0.604898643421630 (analysis/PHYSICS.md,
  // "3D film (Kawabata)"; digits confirmed with mpmath at 30 digits:
  // 0.60489864342163037025).
  EXPECT_LE(rel_err(kawabata_f3(0.0), 0.60489864342163037025), 8 * eps);
  EXPECT_LE(rel_err(kawabata_f3(0.0), (std::sqrt(2.0) - 1.0) * std::fabs(zeta_half)), 8 * eps);
}

TEST(KawabataF3, LargeArgument) {
  // f3(d) ~ d^(-3/2)/48 (analysis/PHYSICS.md, "3D film (Kawabata)"); the next
  // term of the expansion,
  // -7/3072 d^(-7/2) (derived in analysis/internal/special_functions.hpp,
  // verified against mpmath in reference_values.csv), bounds the difference.
  for (double d : {30.0, 1e3, 1e6, 1e8, 1e12}) {
    const double lead = 1.0 / (48 * d * std::sqrt(d));
    EXPECT_LE(std::fabs(kawabata_f3(d) - lead), 1.01 * 7.0 / 3072 / (d * d * d * std::sqrt(d)) + 4 * eps * lead)
        << "d = " << d;
  }
}

TEST(KawabataF3, ClosedFormAtModerateArgument) {
  // f3(d) = -zeta(1/2, 1/2 + d) - 2 sqrt(d) (analysis/PHYSICS.md, "3D film
  // (Kawabata)", derivation): for d <= 2
  // this difference cancels by at most a factor ~30 (zeta(1/2, 2.5) = -2.3
  // against f3(2) = 0.08) on top of the ~10x inside the Euler-Maclaurin sum,
  // so the closed form is an independent route good to ~1e-13.
  for (double d : logspace(-6, std::log10(2.0), 40)) {
    const double closed = -hurwitz_zeta_half(0.5 + d) - 2 * std::sqrt(d);
    EXPECT_LE(rel_err(kawabata_f3(d), closed), 2e-13) << "d = " << d;
  }
}

TEST(KawabataF3, DerivativeAgainstGslHurwitzZeta) {
  // df3/dd = zeta(3/2, 1/2 + d)/2 - 1/sqrt(d), from d zeta(s, a)/da =
  // -s zeta(s + 1, a) (DLMF 25.11.17). GSL's gsl_sf_hzeta covers s > 1. The
  // difference cancels for large d (f3' ~ -d^(-5/2)/32 against 1/sqrt(d)), so
  // the check stays at d <= 20, where the cancellation is below ~1e4.
  gsl_set_error_handler_off();
  for (double d : logspace(-6, std::log10(20.0), 60)) {
    gsl_sf_result hz;
    ASSERT_EQ(gsl_sf_hzeta_e(1.5, 0.5 + d, &hz), GSL_SUCCESS);
    const double want = 0.5 * hz.val - 1.0 / std::sqrt(d);
    const double floor = hz.err + 8 * eps * (0.5 * hz.val + 1.0 / std::sqrt(d));
    EXPECT_LE(std::fabs(kawabata_f3_derivative(d) - want), floor) << "d = " << d;
  }
}

TEST(KawabataF3, PositiveDecreasingAndLogSlope) {
  for (double d : logspace(-8, 12, 300)) {
    const F3AndSlope f = kawabata_f3_and_log_slope(d);
    EXPECT_GT(f.value, 0.0) << d;
    EXPECT_LT(f.log_slope, 0.0) << d;
    EXPECT_EQ(f.value, kawabata_f3(d));
    EXPECT_LE(std::fabs(f.log_slope - d * kawabata_f3_derivative(d)), 4 * eps * std::fabs(f.log_slope)) << d;
  }
  // d f3'(d) -> 0 as d -> 0 (f3' ~ -1/sqrt(d)): finite and exactly 0 at d = 0.
  EXPECT_EQ(kawabata_f3_and_log_slope(0.0).log_slope, 0.0);
  EXPECT_TRUE(std::isinf(kawabata_f3_derivative(0.0)));
  EXPECT_LT(kawabata_f3_derivative(0.0), 0.0);
}

TEST(KawabataF3, EdgesOfTheDomain) {
  EXPECT_EQ(kawabata_f3(std::numeric_limits<double>::infinity()), 0.0);
  EXPECT_TRUE(std::isnan(kawabata_f3(-1e-9)));
  EXPECT_TRUE(std::isnan(kawabata_f3(std::numeric_limits<double>::quiet_NaN())));
  EXPECT_TRUE(std::isnan(kawabata_f3_derivative(-1.0)));
  EXPECT_TRUE(std::isnan(hurwitz_zeta_half(0.0)));
  EXPECT_TRUE(std::isnan(hurwitz_zeta_half(-0.5)));
}

}  // namespace
