// Weak-localization magnetoconductance models.
//
// Every model returns the change of the SHEET conductance,
//   Delta sigma_sq(B) = sigma_sq(B) - sigma_sq(0),
// in units of e^2/(pi h) = 1.2331471e-5 S (si::wl_conductance_s), as a
// function of the perpendicular field B in tesla. Lengths are in metres.
// All models are even in B and exactly zero at B = 0.
//
// Characteristic fields: B_phi = hbar/(4 e L_phi^2), B_so = hbar/(4 e L_so^2).
//
// 1. hln2d: Hikami-Larkin-Nagaoka one-parameter form (S. Hikami, A. I. Larkin,
//    Y. Nagaoka, Prog. Theor. Phys. 63, 707 (1980); G. Bergmann, Phys. Rep.
//    107, 1 (1984)):
//      Delta sigma = alpha [psi(1/2 + B_phi/B) - ln(B_phi/B)]
//    alpha = +1 weak localization (positive magnetoconductance), alpha = -1/2
//    one channel with strong spin-orbit coupling (antilocalization, negative).
//    Valid for t << L_phi (2D), L_phi >> l and B << B_tr = hbar/(2 e l^2).
//
// 2. hln2d_so: the three-term spin-orbit form (HLN 1980; Bergmann 1984)
//      Delta sigma = -(e^2/(2 pi^2 hbar)) [F(B/B_phi)/2 - F(B/(B_phi + B_so))
//                                          - F(B/(B_phi + 2 B_so))/2],
//      F(z) = ln z + psi(1/2 + 1/z).
//    With b(x) = psi(1/2 + x) - ln x we have F(B/B_x) = b(B_x/B), so in
//    e^2/(pi h) units: Delta sigma = b(x_so1) + b(x_so2)/2 - b(x_phi)/2, with
//    x_phi = B_phi/B, x_so1 = (B_phi + B_so)/B, x_so2 = (B_phi + 2 B_so)/B.
//    B_so -> 0 gives hln2d with alpha = +1; B_so -> infinity gives alpha = -1/2.
//    Zeeman splitting is ignored (Maekawa and Fukuyama, JPSJ 50, 2516 (1981)).
//
// 3. wire1d: quasi-1D wire, width w and thickness t << L_phi (B. L. Al'tshuler,
//    A. G. Aronov, JETP Lett. 33, 499 (1981); C. W. J. Beenakker,
//    H. van Houten, PRB 38, 3232 (1988)):
//      Delta G = (e^2/(pi hbar L)) [L_phi - (1/L_phi^2 + 1/L_B^2)^(-1/2)],
//      L_B^2 = 3 hbar^2/(e^2 w^2 B^2).
//    As a sheet conductance (Delta sigma_sq = Delta G L/w) in e^2/(pi h) units:
//      Delta sigma = (2 pi / w) [L_phi - (1/L_phi^2 + 1/L_B^2)^(-1/2)].
//    With spin-orbit (form used by Pierre et al., PRB 68, 085413 (2003)):
//      Delta sigma = -(2 pi / w) [(3/2)(1/L_phi^2 + 4/(3 L_so^2) + 1/L_B^2)^(-1/2)
//                     - (1/2)(1/L_phi^2 + 1/L_B^2)^(-1/2)] + the same at B = 0
//    (so that it vanishes at B = 0). Valid for l << w and sqrt(hbar/(eB)) >> w.
//
// 4. kawabata3d: 3D film, t >> L_phi (A. Kawabata, Solid State Commun. 34, 431
//    (1980)): Delta sigma_3D = (e^2/(2 pi^2 hbar)) sqrt(eB/hbar) f3(B_phi/B)
//    in S/m; as a sheet conductance Delta sigma_sq = t Delta sigma_3D, so in
//    e^2/(pi h) units: Delta sigma = t sqrt(eB/hbar) f3(B_phi/B).
//
// Accuracy: relative error at most 1e-10 against high-precision values over
// B_phi/B from 1e-3 to 1e8, and for every model over B = 1e-6..10 T,
// L_phi = 10 nm..100 um, L_so = 10 nm..10 um (tests/analysis/models/; the worst seen is
// ~1e-12). Where a model changes sign (the spin-orbit forms crossing from
// localization to antilocalization) the error is relative to the sum of the
// magnitudes of its terms.
//
// Numerics: near B = 0 every form is evaluated without cancellation (series
// in B/B_phi for the 2D and 3D brackets; the wire's L_phi - (1/L_phi^2 +
// 1/L_B^2)^(-1/2) rewritten as a product of positive factors), and B = 0 gives
// exactly 0 for values and derivatives.
//
// Domain: lengths must be positive and finite (L_so may be +infinity, meaning
// no spin-orbit scattering), field and alpha finite. Outside it the functions
// return NaN; parameter_error() names the offending argument. Nothing throws.
// All functions are pure and thread-safe.
#pragma once

#include <optional>
#include <string>
#include <string_view>

namespace lphi::mc {

enum class Model { hln2d, hln2d_so, wire1d, kawabata3d };

// The names used by the config file, the command line and the JSON output:
// "hln2d", "hln2d-so", "wire1d", "kawabata3d".
std::string_view model_name(Model m);
std::optional<Model> model_from_name(std::string_view name);

// B_phi = hbar/(4 e L^2) and its inverse L = sqrt(hbar/(4 e B)).
double characteristic_field_t(double length_m);
double characteristic_length_m(double field_t);

// Empty when the arguments of the model's functions are inside the domain,
// otherwise a message naming the first bad one, e.g.
// "lphi_m must be positive and finite (got -1e-07)". lso_m is checked for
// hln2d_so (and for wire1d when given, i.e. non-zero); geometry_m is the wire
// width (wire1d) or the film thickness (kawabata3d) and is ignored otherwise.
std::string parameter_error(Model model, double field_t, double alpha, double lphi_m,
                            double lso_m, double geometry_m);

// Values in units of e^2/(pi h). field_t may be negative (models are even).
double hln2d(double field_t, double alpha, double lphi_m);
double hln2d_so(double field_t, double lphi_m, double lso_m);
double wire1d(double field_t, double lphi_m, double width_m);
double wire1d_so(double field_t, double lphi_m, double lso_m, double width_m);
double kawabata3d(double field_t, double lphi_m, double thickness_m);

// Value and partial derivatives with respect to the fit parameters:
// ln L_phi, ln L_so (where the model has it) and alpha (hln2d only).
// Derivatives that do not apply are 0.
struct ModelGradient {
  double value = 0.0;
  double d_ln_lphi = 0.0;
  double d_ln_lso = 0.0;
  double d_alpha = 0.0;
};
ModelGradient hln2d_grad(double field_t, double alpha, double lphi_m);
ModelGradient hln2d_so_grad(double field_t, double lphi_m, double lso_m);
ModelGradient wire1d_grad(double field_t, double lphi_m, double width_m);
ModelGradient wire1d_so_grad(double field_t, double lphi_m, double lso_m, double width_m);
ModelGradient kawabata3d_grad(double field_t, double lphi_m, double thickness_m);

}  // namespace lphi::mc
