// The simulated sample: how lphi-sim turns a bath temperature and a field into
// a sheet conductance, and the conductance into a lock-in voltage. Pure
// functions of plain values; no I/O, no state, thread-safe.
//
// Dephasing (analysis/PHYSICS.md, "Dephasing rate versus temperature"):
//   1/tau_phi(T_e) = gamma0 + A T_e^p,   L_phi = sqrt(D tau_phi).
//
// Electron heating (analysis/PHYSICS.md, "Electron heating"): once the fault
// is on,
//   T_e = (T^k + T_floor^k)^(1/k),
// k = 2 being the short-wire, pad-cooled form T_e^2 = T^2 + (3/(4 pi^2))(eV/k_B)^2
// with T_floor = (sqrt(3)/(2 pi)) eV/k_B; k = 5 or 6 is electron-phonon
// power balance. Without the fault T_e = T.
//
// Sheet conductance, in S per square:
//   sigma_sq(B, T_e) = 1/R_D + (e^2/(pi h)) [ kappa_ee ln(T_e/T_ref)
//                      + Delta(B; L_phi) - Delta(B_tr; L_phi) ],
//   kappa_ee = 1 - 3F/4,   B_tr = hbar/(2 e l^2),
// Delta the model's Delta sigma_sq (analysis/magnetoconductance.hpp, in units
// of e^2/(pi h), zero at B = 0). Why the B_tr term: the weak-localization
// correction at zero field is the part of the return probability between the
// elastic time and tau_phi, and a field of order B_tr already removes all of
// it. So sigma(0) - sigma(B_tr) = -Delta(B_tr) is the whole zero-field
// correction. For HLN with B_tr >> B_phi, Delta(B_tr) = alpha [ln(B_tr/B_phi)
// + psi(1/2)] = alpha [ln(2 L_phi^2 / l^2) + psi(1/2)], the familiar
// -alpha ln(L_phi^2/l^2) law; with L_phi^2 proportional to T^-p it gives the
// zero-field slope d sigma / d ln T = (e^2/(pi h)) (alpha p + kappa_ee) of
// analysis/PHYSICS.md, "Zero-field temperature dependence". The same
// construction gives a correction proportional to L_phi/w for the wire and a
// finite one in 3D, as it should (analysis/PHYSICS.md, "Zero-field
// corrections beyond 2D"), and it keeps the field dependence exactly the model's:
// sigma(B) - sigma(0) = Delta(B). R_D is therefore the sheet resistance
// without the weak-localization correction (the Drude value) at T_e = T_ref.
//
// Lock-in (four-terminal, current-biased, common practice):
//   X = I R_sq N g  (rms volts), R_sq = 1/sigma_sq, N squares, g preamp gain;
//   Y = q X, q the quadrature fraction (capacitive pickup).
#pragma once

#include <string>

#include "analysis/magnetoconductance.hpp"

namespace lphi::sim {

struct Sample {
  mc::Model model = mc::Model::hln2d;
  double squares = 5.0;                  // L/W between the voltage probes
  double width_m = 20e-6;                // wire1d: the wire width
  double thickness_m = 10e-9;            // kawabata3d: the film thickness
  double drude_rsq_ohm = 1500.0;         // R_D: sheet resistance without WL at T_ref
  double reference_temperature_k = 1.0;  // T_ref of the ln T term
  double diffusion_m2s = 1e-3;           // D
  double mean_free_path_m = 2e-9;        // l
  double alpha = 1.0;                    // hln2d only
  double lso_m = 0.0;                    // hln2d_so (required), wire1d (0: none)
  double interaction_f = 0.5;            // F in kappa_ee = 1 - 3F/4
};

struct DephasingLaw {
  double gamma0_per_s = 0.0;  // saturation rate
  double a_per_s = 2e10;      // A, in s^-1 K^-p
  double p = 1.0;
};

// Empty when usable, otherwise a message naming the first bad field.
std::string sample_error(const Sample& s);
std::string dephasing_error(const DephasingLaw& d);

double kappa_ee(double interaction_f);                 // 1 - 3F/4
double transport_field_t(double mean_free_path_m);     // hbar/(2 e l^2)
double dephasing_rate_per_s(const DephasingLaw& d, double electron_temperature_k);
double lphi_m(const Sample& s, const DephasingLaw& d, double electron_temperature_k);

// (T^k + T_floor^k)^(1/k); T when floor_k is 0.
double heated_temperature_k(double bath_k, double floor_k, double exponent_k);

// The model's Delta sigma_sq(B; L_phi) in units of e^2/(pi h), from
// analysis/magnetoconductance.hpp (wire1d uses its spin-orbit form when
// lso_m > 0).
double model_delta_sigma(const Sample& s, double field_t, double lphi_m);

// sigma_sq(B, T_e) in S, as above.
double sheet_conductance_s(const Sample& s, const DephasingLaw& d, double field_t,
                           double electron_temperature_k);

// X = I R_sq N g, in volts rms.
double lockin_x_v(double sheet_resistance_ohm, double squares, double current_a, double gain);

}  // namespace lphi::sim
