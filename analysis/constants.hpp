// SI 2019 exact constants and the conductance units used throughout lphi.
//
// e, h and k_B are exact by definition since the 2019 redefinition of the SI
// (BIPM, The International System of Units, 9th edition, 2019; CODATA 2018).
// Everything else here is derived from them by algebra, so nothing in this
// file is a measured value.
#pragma once

#include <numbers>

namespace lphi::si {

inline constexpr double pi = std::numbers::pi;

inline constexpr double elementary_charge_c = 1.602176634e-19;  // exact
inline constexpr double planck_j_s = 6.62607015e-34;             // exact
inline constexpr double boltzmann_j_per_k = 1.380649e-23;        // exact
inline constexpr double hbar_j_s = planck_j_s / (2.0 * pi);

// e^2/(pi h) = e^2/(2 pi^2 hbar) = 1.2331471e-5 S. The natural unit of the
// weak-localization correction to the sheet conductance; lphi's fits work in
// this unit so that residuals are of order one.
inline constexpr double wl_conductance_s =
    elementary_charge_c * elementary_charge_c / (pi * planck_j_s);

// G_0 = 2 e^2/h = e^2/(pi hbar) = 7.748091729e-5 S, the conductance quantum.
inline constexpr double conductance_quantum_s =
    2.0 * elementary_charge_c * elementary_charge_c / planck_j_s;

// R_K = h/e^2 = 25812.80745 ohm, the von Klitzing constant.
inline constexpr double von_klitzing_ohm =
    planck_j_s / (elementary_charge_c * elementary_charge_c);

}  // namespace lphi::si
