// Four-point cubic (Lagrange) interpolation of a curve sampled at sorted,
// distinct abscissae: the one interpolation of analysis/ (the conductance
// symmetrization and the field-axis centring use it), so that both judge a
// curve between its readings the same way. Internal to analysis/.
//
// Through the two readings on each side of x, the stencil moved inward at the
// ends of the curve (linear when the curve has fewer than four readings; the
// end value outside the range). Linear interpolation errs by about h^2 f''/8
// at a step h; the cubic errs by about 3 h^4 f''''/128 and is exact for
// polynomials up to x^3. Its weights at mid-step, (-1, 9, 9, -1)/16, raise
// the noise of an interpolated value only from 0.5 to 0.64 of a reading's
// variance. Pure functions; thread-safe.
#pragma once

#include <algorithm>
#include <array>
#include <cstddef>
#include <span>

namespace lphi::detail {

// The readings an interpolated value is made of: value = sum weight[k] *
// y[first + k] for k < count.
struct CubicStencil {
  std::size_t first = 0;
  std::size_t count = 0;
  std::array<double, 4> weight{};
};

// The largest sum of squared cubic weights accepted (see cubic_stencil).
inline constexpr double kMaxCubicNoiseGain = 1.5;

// x: sorted, strictly increasing, not empty.
inline CubicStencil cubic_stencil(std::span<const double> x, double at) {
  CubicStencil s;
  const std::size_t n = x.size();
  const auto hi = std::lower_bound(x.begin(), x.end(), at);
  if (hi == x.end()) {
    s.first = n - 1;
    s.count = 1;
    s.weight[0] = 1.0;
    return s;
  }
  const auto upper = static_cast<std::size_t>(hi - x.begin());
  if (*hi == at || upper == 0) {
    s.first = upper;
    s.count = 1;
    s.weight[0] = 1.0;
    return s;
  }
  if (n < 4) {
    const double t = (at - x[upper - 1]) / (x[upper] - x[upper - 1]);
    s.first = upper - 1;
    s.count = 2;
    s.weight[0] = 1.0 - t;
    s.weight[1] = t;
    return s;
  }
  s.first = std::min(upper >= 2 ? upper - 2 : std::size_t{0}, n - 4);
  s.count = 4;
  double noise_gain = 0.0;  // sum of the squared weights
  for (std::size_t j = 0; j < 4; ++j) {
    double w = 1.0;
    for (std::size_t k = 0; k < 4; ++k)
      if (k != j) w *= (at - x[s.first + k]) / (x[s.first + j] - x[s.first + k]);
    s.weight[j] = w;
    noise_gain += w * w;
  }
  // Nodes that nearly coincide (two legs of a sweep read at almost the same
  // fields) make the Lagrange weights large and of both signs, and the
  // interpolated value amplifies the readings' noise many times. Then the
  // straight line between the two bracketing readings is taken instead: its
  // noise gain is at most 1, and with nodes that close its h^2 f''/8 error
  // is small. Evenly spaced nodes give at most 0.64 inside and 1.08 at the
  // ends of the curve, so the limit 1.5 leaves them cubic.
  if (noise_gain > kMaxCubicNoiseGain) {
    const double t = (at - x[upper - 1]) / (x[upper] - x[upper - 1]);
    s = CubicStencil{};
    s.first = upper - 1;
    s.count = 2;
    s.weight[0] = 1.0 - t;
    s.weight[1] = t;
  }
  return s;
}

inline double apply_stencil(const CubicStencil& s, std::span<const double> y) {
  double v = 0.0;
  for (std::size_t k = 0; k < s.count; ++k) v += s.weight[k] * y[s.first + k];
  return v;
}

}  // namespace lphi::detail
