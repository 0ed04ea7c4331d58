// AAK Nyquist dephasing rates and expected exponents.
#include <gtest/gtest.h>

#include <cmath>
#include <numbers>

#include "analysis/dephasing.hpp"

namespace {

using lphi::dephasing::aak_rate_1d_per_s;
using lphi::dephasing::aak_rate_2d_per_s;

// SI 2019 exact values, typed here from the BIPM SI brochure (9th edition)
// rather than taken from analysis/constants.hpp, so that the test does not
// share the code's constants.
constexpr double kE = 1.602176634e-19;
constexpr double kH = 6.62607015e-34;
constexpr double kKb = 1.380649e-23;
constexpr double kHbar = kH / (2.0 * std::numbers::pi);

TEST(Aak2d, CheckValueAtOneKiloOhmAndOneKelvin) {
  // analysis/PHYSICS.md, "Dephasing rate versus temperature", check value
  // (derivation): R_sq = 1 kohm, T = 1 K gives
  // 1/tau_phi = 1.30e10 s^-1 (tau_phi = 77 ps), from the form quoted by Lin
  // and Bird, J. Phys.: Condens. Matter 14, R501 (2002). Quoted to three
  // figures, so the tolerance is half a unit in the last figure.
  const double rate = aak_rate_2d_per_s(1.0, 1000.0);
  EXPECT_NEAR(rate, 1.30e10, 0.005e10);
  EXPECT_NEAR(1.0 / rate, 77e-12, 0.5e-12);

  // The same formula evaluated here from the SI constants:
  // k_B T e^2 R_sq / (2 pi hbar^2) * ln(pi hbar / (e^2 R_sq)). Only rounding
  // can separate the two evaluations.
  const double e2r = kE * kE * 1000.0;
  const double independent =
      kKb * 1.0 * e2r / (2.0 * std::numbers::pi * kHbar * kHbar) * std::log(std::numbers::pi * kHbar / e2r);
  EXPECT_NEAR(rate / independent, 1.0, 1e-13);
}

TEST(Aak2d, LinearInTemperature) {
  // The 2D Nyquist rate is proportional to T (AAK 1982): an exact scaling.
  EXPECT_NEAR(aak_rate_2d_per_s(0.05, 2500.0) / aak_rate_2d_per_s(1.0, 2500.0), 0.05, 1e-15);
}

TEST(Aak2d, OutsideWeakDisorderIsNaN) {
  // ln(pi hbar/(e^2 R_sq)) <= 0 once R_sq >= pi hbar / e^2 = h/(2 e^2) =
  // 12906.4 ohm (half the von Klitzing constant, SI exact).
  EXPECT_TRUE(std::isnan(aak_rate_2d_per_s(1.0, 13000.0)));
  EXPECT_TRUE(std::isfinite(aak_rate_2d_per_s(1.0, 12800.0)));
  EXPECT_TRUE(std::isnan(aak_rate_2d_per_s(0.0, 1000.0)));
  EXPECT_TRUE(std::isnan(aak_rate_2d_per_s(1.0, -1.0)));
  EXPECT_TRUE(std::isnan(aak_rate_2d_per_s(std::nan(""), 1000.0)));
}

TEST(Aak1d, WorkedExampleGoldWire) {
  // Worked example evaluated by hand for this test: a wire with
  // R/L = 4e6 ohm/m (rho = 2e-8 ohm m, 100 nm x 50 nm cross-section),
  // D = 1e-2 m^2/s, T = 1 K. With the SI values above:
  //   e^2 (R/L)            = 2.566970e-38 * 4e6      = 1.026788e-31
  //   * sqrt(D) = * 0.1                             = 1.026788e-32
  //   * k_B T   = * 1.380649e-23                    = 1.417634e-55
  //   2 sqrt(2) hbar^2 = 2.828427 * 1.112122e-68    = 3.145555e-68
  //   ratio                                         = 4.506784e12 s^-3/2
  //   ^(2/3): 1e8 * 4.506784^(2/3) = 1e8 * exp(2/3 * 1.505584) = 2.72842e8 s^-1
  // (tau_phi = 3.665 ns). Six figures carried: tolerance 1e-5 relative.
  EXPECT_NEAR(aak_rate_1d_per_s(1.0, 4e6, 1e-2) / 2.72842e8, 1.0, 1e-5);
}

TEST(Aak1d, Scalings) {
  // Exact scalings of the 1D form: rate ~ T^(2/3) (R/L)^(2/3) D^(1/3).
  const double r0 = aak_rate_1d_per_s(1.0, 4e6, 1e-2);
  EXPECT_NEAR(aak_rate_1d_per_s(8.0, 4e6, 1e-2) / r0, 4.0, 1e-12);
  EXPECT_NEAR(aak_rate_1d_per_s(1.0, 32e6, 1e-2) / r0, 4.0, 1e-12);
  EXPECT_NEAR(aak_rate_1d_per_s(1.0, 4e6, 8e-2) / r0, 2.0, 1e-12);
  EXPECT_TRUE(std::isnan(aak_rate_1d_per_s(1.0, 4e6, 0.0)));
  EXPECT_TRUE(std::isnan(aak_rate_1d_per_s(-1.0, 4e6, 1e-2)));
}

TEST(ExpectedExponent, ElectronElectronValues) {
  // analysis/PHYSICS.md, "Dephasing rate versus temperature": p = 2/3
  // (quasi-1D), 1 (2D), 3/2 (3D) for electron-electron
  // dephasing (AAK 1982; Lin and Bird 2002).
  EXPECT_DOUBLE_EQ(lphi::dephasing::expected_exponent(1), 2.0 / 3.0);
  EXPECT_DOUBLE_EQ(lphi::dephasing::expected_exponent(2), 1.0);
  EXPECT_DOUBLE_EQ(lphi::dephasing::expected_exponent(3), 1.5);
  EXPECT_TRUE(std::isnan(lphi::dephasing::expected_exponent(4)));
}

TEST(StateName, Spelling) {
  using lphi::dephasing::State;
  EXPECT_EQ(lphi::dephasing::state_name(State::insufficient_data), "insufficient-data");
  EXPECT_EQ(lphi::dephasing::state_name(State::power_law), "power-law");
  EXPECT_EQ(lphi::dephasing::state_name(State::saturating), "saturating");
  EXPECT_EQ(lphi::dephasing::state_name(State::saturated), "saturated");
}

}  // namespace
