// Seeded synthetic L_phi(T) and sigma(T) tables for the dephasing and
// thermometry tests. Noise: std::mt19937_64 (its output sequence is fixed by
// the C++ standard) and a Box-Muller transform written out here, so the
// tables are the same with every standard library.
#pragma once

#include <cmath>
#include <cstdint>
#include <numbers>
#include <random>
#include <vector>

#include "analysis/constants.hpp"
#include "analysis/dephasing.hpp"
#include "analysis/thermometry.hpp"

namespace lphi::testing {

class Gaussian {
 public:
  explicit Gaussian(std::uint64_t seed) : engine_(seed) {}
  double next() {
    if (has_spare_) {
      has_spare_ = false;
      return spare_;
    }
    // Uniforms on (0, 1] from the top 53 bits.
    const double u1 = (static_cast<double>(engine_() >> 11) + 1.0) * 0x1.0p-53;
    const double u2 = static_cast<double>(engine_() >> 11) * 0x1.0p-53;
    const double radius = std::sqrt(-2.0 * std::log(u1));
    const double angle = 2.0 * std::numbers::pi * u2;
    spare_ = radius * std::sin(angle);
    has_spare_ = true;
    return radius * std::cos(angle);
  }

 private:
  std::mt19937_64 engine_;
  bool has_spare_ = false;
  double spare_ = 0.0;
};

// n temperatures evenly spaced in ln T from t_min to t_max.
inline std::vector<double> log_spaced(double t_min, double t_max, std::size_t n) {
  std::vector<double> t(n);
  for (std::size_t i = 0; i < n; ++i)
    t[i] = t_min * std::pow(t_max / t_min, static_cast<double>(i) / static_cast<double>(n - 1));
  return t;
}

struct DephasingTruth {
  double lsat_m = 0.0;  // 0: no saturation
  double b = 0.0;       // m^-2 K^-p
  double p = 1.0;
  double lphi_m(double t) const {
    const double sat = lsat_m > 0.0 ? 1.0 / (lsat_m * lsat_m) : 0.0;
    return 1.0 / std::sqrt(sat + b * std::pow(t, p));
  }
};

// L_phi with Gaussian noise of relative size rel_noise, reported error
// rel_noise * L_true (what a sweep fit with a known noise level reports).
inline std::vector<dephasing::LphiPoint> make_lphi_table(const DephasingTruth& truth,
                                                         const std::vector<double>& temps,
                                                         double rel_noise, std::uint64_t seed) {
  Gaussian g(seed);
  std::vector<dephasing::LphiPoint> out;
  for (double t : temps) {
    const double l = truth.lphi_m(t);
    out.push_back({t, l * (1.0 + rel_noise * g.next()), rel_noise * l});
  }
  return out;
}

// sigma = sigma_1 + kappa (e^2/(pi h)) (1/2) ln(T^2 + T_f^2), noise in units
// of e^2/(pi h).
inline std::vector<thermometry::ZeroFieldPoint> make_sigma_table(
    double sigma_1_s, double kappa, double t_floor_k, const std::vector<double>& temps,
    double noise_units, std::uint64_t seed) {
  Gaussian g(seed);
  const double unit = si::wl_conductance_s;
  std::vector<thermometry::ZeroFieldPoint> out;
  for (double t : temps) {
    const double s = sigma_1_s + kappa * unit * 0.5 * std::log(t * t + t_floor_k * t_floor_k);
    out.push_back({t, s + noise_units * unit * g.next(), noise_units * unit});
  }
  return out;
}

// Pull statistics over many seeds: the sample mean and standard deviation
// of z = (fit - truth)/error, which should be near 0 and 1.
struct ZStats {
  std::vector<double> z;
  void add(double v) { z.push_back(v); }
  double mean() const {
    double s = 0;
    for (double v : z) s += v;
    return s / static_cast<double>(z.size());
  }
  double width() const {
    const double m = mean();
    double s = 0;
    for (double v : z) s += (v - m) * (v - m);
    return std::sqrt(s / static_cast<double>(z.size() - 1));
  }
};

}  // namespace lphi::testing
