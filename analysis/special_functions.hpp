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
// Target: relative error at most 1e-10 for every x > 0.
#pragma once

namespace lphi::special {

double digamma(double x);   // psi(x), x > 0
double trigamma(double x);  // psi'(x), x > 0

// b(x) = psi(1/2 + x) - ln x for x > 0; b(x) > 0, b -> 0 as x -> infinity,
// b(x) ~ -ln x + psi(1/2) for x -> 0. Returns 0 for x = +infinity.
double wl_bracket(double x);
// db/dx = psi'(1/2 + x) - 1/x (negative for all x > 0).
double wl_bracket_derivative(double x);

// Hurwitz zeta function zeta(1/2, a) = sum_{n>=0} (n + a)^(-1/2) continued
// analytically, for a > 0 (Euler-Maclaurin summation, DLMF 25.11).
double hurwitz_zeta_half(double a);

// Kawabata's f3(d) = sum_{n>=0} [2 (sqrt(n+1+d) - sqrt(n+d)) - (n+1/2+d)^(-1/2)]
// = -zeta(1/2, 1/2 + d) - 2 sqrt(d) for d >= 0; f3(0) = (sqrt 2 - 1)|zeta(1/2)|
// = 0.604899, f3(d) ~ d^(-3/2)/48 for large d (computed without cancellation).
double kawabata_f3(double d);
double kawabata_f3_derivative(double d);  // df3/dd

}  // namespace lphi::special
