#include "analysis/internal/special_functions.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <cstddef>
#include <limits>

#include <boost/math/policies/policy.hpp>
#include <boost/math/special_functions/digamma.hpp>
#include <boost/math/special_functions/trigamma.hpp>

namespace lphi::special {
namespace {

namespace bmp = boost::math::policies;

// Double stays double (promote_double<false>); errors become NaN or infinity
// instead of exceptions or errno, so the functions below are noexcept in fact
// and domain checks are done explicitly.
using DoublePolicy =
    bmp::policy<bmp::promote_double<false>, bmp::domain_error<bmp::ignore_error>,
                bmp::pole_error<bmp::ignore_error>, bmp::overflow_error<bmp::ignore_error>,
                bmp::underflow_error<bmp::ignore_error>,
                bmp::evaluation_error<bmp::ignore_error>>;

constexpr double nan = std::numeric_limits<double>::quiet_NaN();

// ---------------------------------------------------------------------------
// Weak-localization bracket b(x) = psi(1/2 + x) - ln x.
//
// Below the crossover the direct difference loses at most a factor ~3e3 to
// cancellation (b(8) = 6.5e-4 against psi(8.5) = 2.08); the worst relative
// error measured against the 50-digit table is 9e-13, near x = 8. At and above it the asymptotic series DLMF 5.11.2 (h = 1/2)
//   b(x) ~ sum_{k>=1} c_k x^(-2k),   c_k = (1 - 2^(1-2k)) B_2k / (2k)
// truncated after 11 terms has a relative truncation error below
// |c_12/c_1| x_c^(-22) = 8.7e4 * 8^(-22) = 1e-15.
constexpr double bracket_crossover = 8.0;

// c_k for k = 1..11, from the exact Bernoulli numbers B_2 = 1/6, B_4 = -1/30,
// B_6 = 1/42, B_8 = -1/30, B_10 = 5/66, B_12 = -691/2730, B_14 = 7/6,
// B_16 = -3617/510, B_18 = 43867/798, B_20 = -174611/330, B_22 = 854513/138.
constexpr std::array<double, 11> bracket_coefficients = {
    (1.0 - 0x1p-1) * (1.0 / 6.0) / 2.0,
    (1.0 - 0x1p-3) * (-1.0 / 30.0) / 4.0,
    (1.0 - 0x1p-5) * (1.0 / 42.0) / 6.0,
    (1.0 - 0x1p-7) * (-1.0 / 30.0) / 8.0,
    (1.0 - 0x1p-9) * (5.0 / 66.0) / 10.0,
    (1.0 - 0x1p-11) * (-691.0 / 2730.0) / 12.0,
    (1.0 - 0x1p-13) * (7.0 / 6.0) / 14.0,
    (1.0 - 0x1p-15) * (-3617.0 / 510.0) / 16.0,
    (1.0 - 0x1p-17) * (43867.0 / 798.0) / 18.0,
    (1.0 - 0x1p-19) * (-174611.0 / 330.0) / 20.0,
    (1.0 - 0x1p-21) * (854513.0 / 138.0) / 22.0,
};

// Sum of c_k w^k and of -2k c_k w^k (= x db/dx) with w = 1/x^2, by Horner.
BracketAndSlope bracket_asymptotic(double x) {
  const double w = 1.0 / (x * x);
  double value = 0.0;
  double slope = 0.0;
  for (std::size_t i = bracket_coefficients.size(); i-- > 0;) {
    const double c = bracket_coefficients[i];
    const double k = static_cast<double>(i + 1);
    value = value * w + c;
    slope = slope * w - 2.0 * k * c;
  }
  return {value * w, slope * w};
}


// ---------------------------------------------------------------------------
// Kawabata's f3.
//
// f3(d) = sum_{n>=0} g(n + 1/2 + d) with
//   g(y) = 2 (sqrt(y + 1/2) - sqrt(y - 1/2)) - 1/sqrt(y).
// With p = sqrt(y + 1/2), m = sqrt(y - 1/2), r = sqrt(y) and (p - m)(p + m) = 1,
// 2r - p - m = (p - m) / (2 (r + p)(r + m)), so
//   g(y) = 1 / (2 r (p + m)^2 (r + p)(r + m)),
// a product of positive factors with no cancellation (g ~ y^(-5/2)/32).
//
// The first terms are summed exactly until the argument reaches the
// crossover; the remainder f3(d + N) comes from the large-d expansion
//   f3(z) ~ sum_{m>=1} a_m z^(1/2-2m),  a_m = (1 - 2^(1-2m)) B_2m/(2m)! (1/2)_(2m-1)
// (Hurwitz zeta asymptotics DLMF 25.11.43 with h = 1/2, B_k(1/2) from DLMF
// 24.4.27). Ten terms at z >= 8: truncation below |a_11/a_1| 8^(-20) = 1.4e-15.
constexpr double f3_crossover = 8.0;
constexpr double zeta_shift = 8.0;  // same error bound for zeta(1/2, b >= 8)

constexpr double pochhammer_half(int n) {  // (1/2)_n = (1/2)(3/2)...(n - 1/2)
  double p = 1.0;
  for (int i = 0; i < n; ++i) p *= 0.5 + i;
  return p;
}
constexpr double factorial(int n) {
  double f = 1.0;
  for (int i = 2; i <= n; ++i) f *= i;
  return f;
}

// B_2m / (2m)! (1/2)_(2m-1) for m = 1..10 (the Euler-Maclaurin coefficients of
// zeta(1/2, .), DLMF 25.11.7 / 2.10.1).
constexpr std::array<double, 10> bernoulli_2m = {
    1.0 / 6.0,    -1.0 / 30.0,        1.0 / 42.0,     -1.0 / 30.0,       5.0 / 66.0,
    -691.0 / 2730.0, 7.0 / 6.0,       -3617.0 / 510.0, 43867.0 / 798.0,  -174611.0 / 330.0,
};
constexpr std::array<double, 10> euler_maclaurin_half = [] {
  std::array<double, 10> e{};
  for (int m = 1; m <= 10; ++m)
    e[static_cast<std::size_t>(m - 1)] =
        bernoulli_2m[static_cast<std::size_t>(m - 1)] / factorial(2 * m) * pochhammer_half(2 * m - 1);
  return e;
}();
constexpr std::array<double, 10> f3_coefficients = [] {
  std::array<double, 10> a{};
  double two_power = 0.5;  // 2^(1-2m)
  for (std::size_t i = 0; i < a.size(); ++i) {
    a[i] = (1.0 - two_power) * euler_maclaurin_half[i];
    two_power *= 0.25;
  }
  return a;
}();

// f3(z) and z f3'(z) from the expansion, z >= f3_crossover.
F3AndSlope f3_asymptotic(double z) {
  const double w = 1.0 / (z * z);
  double value = 0.0;
  double slope = 0.0;
  for (std::size_t i = f3_coefficients.size(); i-- > 0;) {
    const double a = f3_coefficients[i];
    const double m = static_cast<double>(i + 1);
    value = value * w + a;
    slope = slope * w + (0.5 - 2.0 * m) * a;
  }
  const double z_minus_three_halves = 1.0 / (z * std::sqrt(z));
  return {value * z_minus_three_halves, slope * z_minus_three_halves};
}

}  // namespace

double digamma(double x) {
  if (!(x > 0.0)) return nan;
  if (std::isinf(x)) return x;
  return boost::math::digamma(x, DoublePolicy());
}

double trigamma(double x) {
  if (!(x > 0.0)) return nan;
  if (std::isinf(x)) return 0.0;
  return boost::math::trigamma(x, DoublePolicy());
}

BracketAndSlope wl_bracket_and_log_slope(double x) {
  if (!(x > 0.0)) return {nan, nan};
  if (std::isinf(x)) return {0.0, 0.0};
  if (x >= bracket_crossover) return bracket_asymptotic(x);
  return {boost::math::digamma(0.5 + x, DoublePolicy()) - std::log(x),
          x * boost::math::trigamma(0.5 + x, DoublePolicy()) - 1.0};
}

// The two-argument form, inlined into the sweep loop below: the one-argument
// form with ln x given.
inline BracketAndSlope bracket_with_log(double x, double ln_x) {
  if (!(x > 0.0)) return {nan, nan};
  if (x >= bracket_crossover) return std::isinf(x) ? BracketAndSlope{} : bracket_asymptotic(x);
  return {boost::math::digamma(0.5 + x, DoublePolicy()) - ln_x,
          x * boost::math::trigamma(0.5 + x, DoublePolicy()) - 1.0};
}

BracketAndSlope wl_bracket_and_log_slope(double x, double ln_x) { return bracket_with_log(x, ln_x); }

void wl_bracket_and_log_slope(double scale, double ln_scale, std::span<const double> factor,
                              std::span<const double> ln_factor, std::span<BracketAndSlope> out) {
  const std::size_t n = std::min({factor.size(), ln_factor.size(), out.size()});
  for (std::size_t i = 0; i < n; ++i)
    out[i] = bracket_with_log(scale * factor[i], ln_scale + ln_factor[i]);
}

double wl_bracket(double x, double ln_x) {
  if (!(x > 0.0)) return nan;
  if (x >= bracket_crossover) return std::isinf(x) ? 0.0 : bracket_asymptotic(x).value;
  return boost::math::digamma(0.5 + x, DoublePolicy()) - ln_x;
}

double wl_bracket(double x) {
  if (!(x > 0.0)) return nan;
  if (std::isinf(x)) return 0.0;
  if (x >= bracket_crossover) return bracket_asymptotic(x).value;
  return boost::math::digamma(0.5 + x, DoublePolicy()) - std::log(x);
}

double wl_bracket_derivative(double x) {
  if (!(x > 0.0)) return nan;
  if (std::isinf(x)) return 0.0;
  if (x >= bracket_crossover) {
    // db/dx = (x db/dx)/x; for huge x the quotient underflows gracefully.
    return bracket_asymptotic(x).log_slope / x;
  }
  return boost::math::trigamma(0.5 + x, DoublePolicy()) - 1.0 / x;
}

double hurwitz_zeta_half(double a) {
  if (!(a > 0.0) || std::isinf(a)) return nan;
  // Euler-Maclaurin (DLMF 2.10.1 applied to (n + a)^(-1/2)): sum the first
  // terms directly until b = a + N >= zeta_shift, then
  //   zeta(1/2, b) ~ -2 sqrt(b) + b^(-1/2)/2 + sum_k e_k b^(1/2 - 2k),
  // remainder below |e_11| 8^(-21.5) ~ 1e-18 in absolute terms.
  double direct = 0.0;
  double b = a;
  while (b < zeta_shift) {
    direct += 1.0 / std::sqrt(b);
    b += 1.0;
  }
  const double root = std::sqrt(b);
  const double w = 1.0 / (b * b);
  double series = 0.0;
  for (std::size_t i = euler_maclaurin_half.size(); i-- > 0;) series = series * w + euler_maclaurin_half[i];
  const double tail = -2.0 * root + 0.5 / root + series * w * root;
  return direct + tail;
}

F3AndSlope kawabata_f3_and_log_slope(double d) {
  if (!(d >= 0.0)) return {nan, nan};
  if (std::isinf(d)) return {0.0, 0.0};
  if (d >= f3_crossover) return f3_asymptotic(d);

  // Sum the exact terms smallest-first (the tail, then n = N-1 .. 0) so that
  // the rounding errors of the large early terms are not amplified.
  const int n_direct = static_cast<int>(std::ceil(f3_crossover - d));
  const double z = d + n_direct;
  const F3AndSlope tail = f3_asymptotic(z);
  double value = tail.value;
  double slope = tail.log_slope * (d / z);  // d A'(z) = (d/z) (z A'(z))
  // y = n + 1/2 + d; the roots are taken of sums formed directly from n and d
  // so that sqrt(n + d) keeps its accuracy for tiny d. Term n's p is term
  // n+1's m, so each step takes two new roots.
  double p = std::sqrt(z);
  for (int n = n_direct - 1; n >= 0; --n) {
    const double m = std::sqrt(n + d);
    const double r = std::sqrt((n + 0.5) + d);
    const double pm = p + m;
    value += 1.0 / (2.0 * r * pm * pm * (r + p) * (r + m));
    // d g'(y) with g'(y) = 1/(2 r^3) - 1/(p m (p + m)); for n = 0, m^2 = d,
    // so d/m = m keeps the term finite (it is 0 at d = 0).
    const double d_over_m = (n == 0) ? m : d / m;
    slope += d / (2.0 * r * r * r) - d_over_m / (p * pm);
    p = m;
  }
  return {value, slope};
}

double kawabata_f3(double d) { return kawabata_f3_and_log_slope(d).value; }

double kawabata_f3_derivative(double d) {
  if (!(d >= 0.0)) return nan;
  if (d == 0.0) return -std::numeric_limits<double>::infinity();
  if (std::isinf(d)) return 0.0;
  return kawabata_f3_and_log_slope(d).log_slope / d;
}

}  // namespace lphi::special
