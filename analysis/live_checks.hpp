// The checks lphi runs on every update of a sample: dimensional regime,
// excitation heating, lock-in overload and quadrature, fit quality.
//
// Each check is one function of plain values, with its formula and source
// here. None of them decides anything alone: they return the numbers and a
// flag, and the caller (the alert rules) chooses what to do with them.
// Bad input (non-finite, or negative where a size is meant) gives a result
// with `error` naming the argument and every flag false; nothing throws.
//
// 1. Dimensional regime (analysis/PHYSICS.md, "Dimensional regime"; Lee and
//    Ramakrishnan, Rev. Mod. Phys. 57, 287 (1985), for the classification;
//    the margin is common practice). With a length L (L_phi for weak
//    localization, L_T = sqrt(hbar D / (k_B T)) for the interaction
//    correction), film thickness t and width w, and "a << b" read as
//    margin * a <= b:
//      3d        L << t
//      quasi-1d  w << L and t << L
//      2d        t << L << w
//      crossover otherwise (some length within a factor `margin` of L).
//    An unknown width (0) counts as wide (w = infinity), an unknown
//    thickness (0) as thin (t = 0): a sample without geometry is 2d.
//
// 2. Excitation heating (analysis/PHYSICS.md, "Electron heating"; common
//    practice):
//    the ratio r = e V / (k_B T) of the voltage across the sample to the
//    thermal energy; keep r below 1 (k_B T / e = 8.6 uV at 100 mK). For a
//    short wire whose electrons cool only by conduction to pads at T (no
//    phonons), Joule heating against the Wiedemann-Franz heat current,
//    (L_0 sigma / 2) d^2(T_e^2)/dx^2 = -sigma E^2 with L_0 = (pi^2/3)(k_B/e)^2,
//    gives T_e(x)^2 = T^2 + (E^2 / L_0) x (L - x); at the middle of the wire
//      T_e = sqrt(T^2 + (3 / (4 pi^2)) (e V / k_B)^2) = T sqrt(1 + 0.0760 r^2),
//    so r = 1 gives T_e = 1.037 T [derived]. It is the hottest point, so an
//    upper estimate for a wire and a rough one for a film. V is the rms voltage between the probes
//    as the lock-in reports it. The per-coherence-length form
//    e V L_phi / L < k_B T is reported when L_phi and the length between the
//    probes are given; it is necessary, not sufficient.
//
// 3. Lock-in (analysis/PHYSICS.md, "From the measurement to the sheet
//    conductance"):
//    an overload is the instrument's flag, or |X| >= range or |Y| >= range
//    when the range is known; the quadrature ratio is |Y / X| (+infinity when
//    X = 0 and Y != 0; 0 when both are 0). A large quadrature means
//    capacitive pickup or a wrong phase.
//
// 4. Fit quality (analysis/sweep_fit.hpp): a failed fit, one that did not
//    converge, or chi2_red above a limit. chi2_red is dimensionless only when
//    the fit was given point errors; without them it is a mean squared
//    residual in (e^2/(pi h))^2, so the caller says which case it is and the
//    limit applies only with point errors. The sweep fit's own flags are
//    passed on by name; those that make L_phi unusable for L_phi(T) are
//    window-too-narrow, too-few-points, parameter-at-limit, not-converged.
//
// No I/O, no threads, deterministic.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "analysis/sweep_fit.hpp"

namespace lphi::checks {

// ---- 1. Dimensional regime ---------------------------------------------

enum class Regime { two_d, quasi_1d, three_d, crossover };
std::string_view regime_name(Regime r);  // "2d", "quasi-1d", "3d", "crossover"

// L_T = sqrt(hbar D / (k_B T)); NaN unless D > 0 and T > 0, both finite.
double thermal_length_m(double diffusion_m2s, double temperature_k);

// The classification above for one length (no error handling: L > 0 finite,
// w and t >= 0 finite, margin >= 1 are the caller's to check).
Regime classify(double length_m, double width_m, double thickness_m, double margin);

struct RegimeOptions {
  double margin = 3.0;  // "a << b" means margin * a <= b (common practice)
};

struct RegimeCheck {
  std::string error;                   // non-empty: input refused
  Regime regime = Regime::crossover;   // from L_phi
  double lphi_m = 0.0;
  double width_m = 0.0, thickness_m = 0.0;
  // From the thermal length, when D and T were given:
  std::optional<double> thermal_length_m;
  std::optional<Regime> interaction_regime;
  // True when the regime from L_phi is the one the fitted model assumes
  // (hln2d, hln2d_so: 2d; wire1d: quasi-1d; kawabata3d: 3d).
  bool model_consistent = false;
};

// diffusion_m2s and temperature_k: 0 when unknown (no thermal length).
RegimeCheck dimensional_regime(double lphi_m, double width_m, double thickness_m,
                               mc::Model model, double diffusion_m2s = 0.0,
                               double temperature_k = 0.0, const RegimeOptions& options = {});

// ---- 2. Excitation heating ---------------------------------------------

// k_B T / e in volts.
double thermal_voltage_v(double temperature_k);
// T_e = sqrt(T^2 + (3/(4 pi^2)) (e V/k_B)^2); NaN for T <= 0 or non-finite.
double wire_electron_temperature_k(double temperature_k, double sample_voltage_v);

struct HeatingOptions {
  double max_ratio = 1.0;  // e V / k_B T at or above this is a heating risk
};

struct HeatingCheck {
  std::string error;
  double ratio = 0.0;                 // e V / (k_B T)
  double thermal_voltage_v = 0.0;     // k_B T / e
  double wire_electron_temperature_k = 0.0;
  std::optional<double> coherence_length_ratio;  // e V (L_phi / L) / (k_B T)
  bool risk = false;                  // ratio >= max_ratio
};

// sample_voltage_v: rms voltage between the probes (sign ignored).
// lphi_m and probe_length_m: 0 when unknown.
HeatingCheck excitation_heating(double sample_voltage_v, double temperature_k,
                                double lphi_m = 0.0, double probe_length_m = 0.0,
                                const HeatingOptions& options = {});

// ---- 3. Lock-in --------------------------------------------------------

struct LockinOptions {
  double max_quadrature_ratio = 0.1;  // |Y/X| above this is large (common practice)
};

struct LockinCheck {
  std::string error;
  bool overload = false;
  double quadrature_ratio = 0.0;  // |Y/X|
  bool large_quadrature = false;
};

// range_v: 0 when unknown (then only the instrument's flag counts).
LockinCheck lockin_reading(double x_v, double y_v, double range_v, bool overload_flag,
                           const LockinOptions& options = {});

// ---- 4. Fit quality ----------------------------------------------------

struct FitQualityOptions {
  double max_chi2_red = 3.0;  // with point errors
};

struct FitQualityCheck {
  bool failed = false;             // !ok: the input could not be fitted
  bool not_converged = false;
  bool chi2_above_limit = false;   // only judged with point errors
  bool usable_for_dephasing = false;
  double chi2_red = 0.0;
  std::vector<std::string> reasons;  // "fit-failed: ...", "chi2-red-above-limit", flag names
};

FitQualityCheck fit_quality(const fit::SweepFitResult& fit, bool point_errors_given,
                            const FitQualityOptions& options = {});

}  // namespace lphi::checks
