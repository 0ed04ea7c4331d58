// The Altshuler-Aronov-Khmelnitsky Nyquist dephasing rates and the
// electron-electron exponents (declared in analysis/dephasing.hpp; formulas
// in analysis/PHYSICS.md, "Dephasing rate versus temperature").
#include <cmath>
#include <limits>
#include <numbers>

#include "analysis/constants.hpp"
#include "analysis/dephasing.hpp"

namespace lphi::dephasing {

namespace {
// Outside a formula's domain (its own name: this file shares a unity batch
// with dephasing.cpp).
constexpr double kNoRate = std::numeric_limits<double>::quiet_NaN();
}  // namespace

double expected_exponent(int dimension) {
  switch (dimension) {
    case 1: return 2.0 / 3.0;
    case 2: return 1.0;
    case 3: return 1.5;
    default: return kNoRate;
  }
}

// 2D AAK Nyquist rate (header; Lin and Bird 2002, their form of AAK 1982).
double aak_rate_2d_per_s(double temperature_k, double sheet_resistance_ohm) {
  using namespace lphi::si;
  if (!(std::isfinite(temperature_k) && temperature_k > 0.0)) return kNoRate;
  if (!(std::isfinite(sheet_resistance_ohm) && sheet_resistance_ohm > 0.0)) return kNoRate;
  const double e2r = elementary_charge_c * elementary_charge_c * sheet_resistance_ohm;
  const double log_g = std::log(pi * hbar_j_s / e2r);
  if (!(log_g > 0.0)) return kNoRate;
  return boltzmann_j_per_k * temperature_k * e2r / (2.0 * pi * hbar_j_s * hbar_j_s) * log_g;
}

// 1D AAK Nyquist rate (header; AAK 1982).
double aak_rate_1d_per_s(double temperature_k, double resistance_per_length_ohm_m,
                         double diffusion_m2s) {
  using namespace lphi::si;
  if (!(std::isfinite(temperature_k) && temperature_k > 0.0)) return kNoRate;
  if (!(std::isfinite(resistance_per_length_ohm_m) && resistance_per_length_ohm_m > 0.0))
    return kNoRate;
  if (!(std::isfinite(diffusion_m2s) && diffusion_m2s > 0.0)) return kNoRate;
  const double inner = elementary_charge_c * elementary_charge_c * resistance_per_length_ohm_m *
                       std::sqrt(diffusion_m2s) * boltzmann_j_per_k * temperature_k /
                       (2.0 * std::numbers::sqrt2 * hbar_j_s * hbar_j_s);
  return std::cbrt(inner * inner);
}

}  // namespace lphi::dephasing
