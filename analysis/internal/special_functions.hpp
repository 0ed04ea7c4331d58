// Special functions behind the magnetoconductance models.
//
// digamma and trigamma come from Boost.Math with a policy that keeps double
// arithmetic in double (Boost's default promotes to long double, which is 4-6
// times slower and buys nothing at the accuracy lphi needs).
//
// The weak-localization bracket psi(1/2 + x) - ln x cancels catastrophically
// for large x (x = B_phi/B is huge near zero field): the direct difference
// keeps only about 1e-4 relative accuracy at x = 1e5 and nothing at x = 1e7.
// For large x it is computed from the asymptotic expansion of the digamma
// function (DLMF 5.11.2 with h = 1/2):
//   psi(1/2 + x) - ln x ~ sum_k (1 - 2^(1-2k)) B_2k / (2k x^(2k))
//                       = 1/(24 x^2) - 7/(960 x^4) + 31/(8064 x^6) - ...
// The crossover and the number of terms are chosen so that the relative error
// of the bracket and of its derivative stays at most 1e-10 for every x > 0
// (tests/analysis/models/ checks this against 50-digit values).
//
// Kawabata's f3 is summed without cancellation: a few exact terms of its
// series, each written in a form free of differences of nearly equal square
// roots, then the large-d expansion
//   f3(d) ~ sum_m (1 - 2^(1-2m)) B_2m/(2m)! (1/2)_(2m-1) d^(1/2-2m)
//         = d^(-3/2)/48 - 7 d^(-7/2)/3072 + ...
// which follows from the Hurwitz zeta expansion DLMF 25.11.43 with h = 1/2
// (B_k(1/2) = -(1 - 2^(1-k)) B_k, DLMF 24.4.27).
//
// Domain: outside the stated domain (x <= 0, NaN) every function returns NaN;
// nothing here throws or writes errno. All functions are pure and thread-safe.
#pragma once

#include <span>

namespace lphi::special {

double digamma(double x);   // psi(x), x > 0
double trigamma(double x);  // psi'(x), x > 0

// b(x) = psi(1/2 + x) - ln x for x > 0; b(x) > 0, b -> 0 as x -> infinity,
// b(x) ~ -ln x + psi(1/2) for x -> 0. Returns 0 for x = +infinity.
double wl_bracket(double x);
// db/dx = psi'(1/2 + x) - 1/x (negative for all x > 0).
double wl_bracket_derivative(double x);

// The bracket and its logarithmic derivative x db/dx = x psi'(1/2 + x) - 1 in
// one call, as the fits need them (d x/d ln L_phi = -2x). The logarithmic
// form stays representable where x is huge and db/dx underflows.
struct BracketAndSlope {
  double value = 0.0;       // b(x)
  double log_slope = 0.0;   // x db/dx (0 at x = +infinity)
};
BracketAndSlope wl_bracket_and_log_slope(double x);
// The same with ln x supplied by the caller, for fits that evaluate the
// bracket at x_i = B_phi/|B_i| over a whole sweep: ln x_i = ln B_phi - ln|B_i|
// from logarithms taken once per sweep and once per parameter set, so no
// logarithm of x is taken here. ln_x must be ln x to within a few ulp of its
// magnitude (the error it carries is amplified like that of the direct
// difference, see above); it is not checked against x. Same domain and
// accuracy as the one-argument form.
BracketAndSlope wl_bracket_and_log_slope(double x, double ln_x);
double wl_bracket(double x, double ln_x);  // its value alone
// The same over a whole sweep: out[i] = wl_bracket_and_log_slope(x_i, ln x_i)
// with x_i = scale * factor[i], ln x_i = ln_scale + ln_factor[i] (for the HLN
// model scale = B_phi, factor = 1/|B|). factor = +infinity (a zero field)
// gives {0, 0}. Entries past the shortest of the three spans are not touched.
void wl_bracket_and_log_slope(double scale, double ln_scale, std::span<const double> factor,
                              std::span<const double> ln_factor, std::span<BracketAndSlope> out);

// Hurwitz zeta function zeta(1/2, a) = sum_{n>=0} (n + a)^(-1/2) continued
// analytically, for a > 0 (Euler-Maclaurin summation, DLMF 25.11). It changes
// sign near a = 0.3, so near there only its absolute error is small (~1e-16).
double hurwitz_zeta_half(double a);

// Kawabata's f3(d) = sum_{n>=0} [2 (sqrt(n+1+d) - sqrt(n+d)) - (n+1/2+d)^(-1/2)]
// = -zeta(1/2, 1/2 + d) - 2 sqrt(d) for d >= 0; f3(0) = (sqrt 2 - 1)|zeta(1/2)|
// = 0.604899, f3(d) ~ d^(-3/2)/48 for large d (computed without cancellation).
// Returns 0 for d = +infinity.
double kawabata_f3(double d);
// df3/dd = zeta(3/2, 1/2 + d)/2 - 1/sqrt(d); -infinity at d = 0.
double kawabata_f3_derivative(double d);

// f3 and its logarithmic derivative d df3/dd (finite, -> 0 as d -> 0).
struct F3AndSlope {
  double value = 0.0;      // f3(d)
  double log_slope = 0.0;  // d df3/dd
};
F3AndSlope kawabata_f3_and_log_slope(double d);

}  // namespace lphi::special
