// SI constants in analysis/constants.hpp against the CODATA 2018 recommended
// values (NIST, https://physics.nist.gov/cuu/Constants/, which since the 2019
// SI redefinition are exact consequences of the fixed e and h). CODATA prints
// these exact values truncated ("25 812.807 45..."), so each check asserts
// quoted <= value < quoted + one unit in the last quoted digit. The quoted
// digits are from memory of the CODATA table; each is also what the exact e
// and h give, so a slip in memory would show as a failure here, not hide one.
#include <gtest/gtest.h>

#include <cmath>

#include "analysis/constants.hpp"

namespace {

using namespace lphi::si;

void expect_truncation_of(double value, double quoted, double last_digit_unit) {
  EXPECT_GE(value, quoted) << "quoted " << quoted;
  EXPECT_LT(value, quoted + last_digit_unit) << "quoted " << quoted;
}

TEST(Constants, DefiningValuesSi2019) {
  // The defining constants, exact by the 2019 SI (BIPM SI Brochure, 9th ed.).
  EXPECT_EQ(elementary_charge_c, 1.602176634e-19);
  EXPECT_EQ(planck_j_s, 6.62607015e-34);
  EXPECT_EQ(boltzmann_j_per_k, 1.380649e-23);
  // hbar = 1.054 571 817...e-34 J s (CODATA 2018).
  expect_truncation_of(hbar_j_s, 1.054571817e-34, 1e-43);
}

TEST(Constants, ConductanceUnits) {
  // von Klitzing constant R_K = h/e^2 = 25 812.807 45... ohm (CODATA 2018).
  expect_truncation_of(von_klitzing_ohm, 25812.80745, 1e-5);
  // e^2/h = 1/R_K = 3.874 045 86...e-5 S (CODATA 2018, "e^2/h").
  expect_truncation_of(1.0 / von_klitzing_ohm, 3.87404586e-5, 1e-13);
  // Conductance quantum G_0 = 2e^2/h = 7.748 091 729...e-5 S (CODATA 2018).
  expect_truncation_of(conductance_quantum_s, 7.748091729e-5, 1e-14);
  // e^2/(pi h) = 1.2331471e-5 S (analysis/PHYSICS.md, "Constants and units",
  // rounded to 8 digits; = G_0/(2 pi)):
  // within half a unit of the last digit.
  EXPECT_NEAR(wl_conductance_s, 1.2331471e-5, 0.5e-12);
}

TEST(Constants, IdentitiesBetweenUnits) {
  // e^2/(pi h) = e^2/(2 pi^2 hbar) (the two notations of
  // analysis/PHYSICS.md, "Constants and units") and
  // G_0 = e^2/(pi hbar) = 2/R_K; these hold to rounding (a few ulp).
  const double e2 = elementary_charge_c * elementary_charge_c;
  EXPECT_NEAR(wl_conductance_s / (e2 / (2 * pi * pi * hbar_j_s)), 1.0, 1e-15);
  EXPECT_NEAR(conductance_quantum_s / (e2 / (pi * hbar_j_s)), 1.0, 1e-15);
  EXPECT_NEAR(conductance_quantum_s * von_klitzing_ohm, 2.0, 1e-15);
  EXPECT_NEAR(wl_conductance_s * 2 * pi / conductance_quantum_s, 1.0, 1e-15);
}

}  // namespace
