// The per-sample verdict: has L_phi saturated, are the electrons still
// cooling, and is a saturation physics or hot electrons?
//
// Inputs: the L_phi(T) fit (analysis/dephasing.hpp) and sigma(B = 0) per
// temperature plateau (the zero-field electron thermometer,
// analysis/thermometry.hpp).
//
// Why sigma(0) cannot be used as it is. In 2D (Lee and Ramakrishnan, Rev.
// Mod. Phys. 57, 287 (1985); analysis/PHYSICS.md, "Zero-field temperature
// dependence")
//   sigma(T) = const + (e^2/(pi h)) [ -alpha ln(L_phi(T)^2) + (1 - 3F/4) ln T ]
// in the weak-localization part -alpha ln(tau_phi/tau) = -alpha ln(L_phi^2/l^2)
// (HLN; Bergmann, Phys. Rep. 107, 1 (1984)) plus the interaction part. With
// L_phi ~ T^(-p/2) the two give the familiar slope alpha p + (1 - 3F/4).
//   - Intrinsic saturation: L_phi stops growing, the weak-localization part
//     stops, but the electrons still cool and the interaction part keeps
//     following ln T. sigma(0) only CHANGES SLOPE, from alpha p + (1 - 3F/4)
//     to (1 - 3F/4).
//   - Hot electrons (or noise heating them): T_e stops falling, and every
//     T-dependent term stops with it. sigma(0) FLATTENS entirely.
// The thermometry floor model, sigma_1 + kappa (1/2) ln(T^2 + T_floor^2),
// flattens entirely, but on raw sigma(0) a mere change of slope also fits it
// better than a straight line, so with precise data an intrinsic saturation
// would read as "departs". lphi therefore removes the weak-localization part
// first, using the fitted L_phi(T):
//   sigma_int(T) = sigma(0, T) + alpha (e^2/(pi h)) ln(L_phi(T)^2 / L_phi(T_ref)^2),
// with L_phi(T)^-2 = L_sat^-2 + b T^p from the dephasing fit (L_sat^-2 = 0
// for a power law; L_sat alone when the fit found L_phi flat), T_ref its
// reference temperature (the reference only shifts a constant). sigma_int
// is the interaction part, which must keep following ln T while the
// electrons cool, with slope 1 - 3F/4 (between 1/4 and 1 for 0 <= F <= 1).
// alpha is the effective prefactor of the zero-field correction: +1 for
// weak localization, -1/2 with strong spin-orbit scattering (valid when L_so
// is far from L_phi at every temperature used). The model's errors are not
// propagated into sigma_int: the point errors stay those of sigma(0).
// The ln T thermometer is the 2D form; for dimension 1 or 3 (whose
// interaction corrections go as T^(-1/2) and T^(1/2)) the cooling check is
// not made and electrons_cooling is unknown.
//
// electrons_cooling, from analyse_zero_field on sigma_int:
//   unknown  the thermometry is insufficient or refused; or the dimension is
//            not 2; or the interaction slope is not resolved
//            (kappa < min_slope_sigmas * its error: sigma(0) is then no
//            thermometer); or there is no L_phi(T) model (dephasing state
//            insufficient-data) and the raw sigma(0) departs (a change of
//            slope and a flattening cannot be told apart without it);
//   false    sigma_int departs from ln T (significant flattening);
//   true     sigma_int follows ln T with a resolved slope (without an L_phi
//            model, raw sigma(0) doing so is also enough: neither part has
//            stopped).
//
// likely_cause, only when the dephasing state is saturating or saturated:
//   electron-heating-or-noise
//            electrons_cooling = false and the temperature where sigma_int
//            leaves ln T, T_floor, lies within a factor heating_match_factor
//            (default 3) of T_sat; or L_phi is flat over the whole range
//            (no T_sat) and sigma_int is flat over it too (no T_floor).
//            Why 3 and not 2: hot electrons give L_phi^-2 = b T_e^p with
//            T_e = sqrt(T^2 + T_f^2), a smoother knee than the saturating
//            model's L_sat^-2 + b T^p, which therefore puts T_sat above T_f:
//            about 2 T_f (with p near 1.3) for p = 1 data over 20 mK - 1 K
//            and T_f = 100 mK (tests/pipeline/verdict_test.cpp).
//   intrinsic
//            electrons_cooling = true and the thermometer's data reach well
//            below T_sat: T_min(sigma) <= intrinsic_below_ratio * T_sat
//            (default 0.5); or L_phi is flat over the whole range while the
//            electrons are seen to cool over it.
//   unknown  anything else: cooling unknown; cooling but the data do not go
//            far enough below T_sat to tell; not cooling, but at a
//            temperature unrelated to T_sat.
// Every decision leaves a sentence in `notes` saying why.
//
// No I/O, no threads, deterministic.
#pragma once

#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "analysis/dephasing.hpp"
#include "analysis/thermometry.hpp"

namespace lphi::verdict {

enum class Cause { intrinsic, electron_heating_or_noise, unknown };
std::string_view cause_name(Cause c);  // "intrinsic", "electron-heating-or-noise", "unknown"

struct VerdictOptions {
  int dimension = 2;                 // the sample's; the check needs 2
  double alpha = 1.0;                // effective WL prefactor (see above)
  double heating_match_factor = 3.0; // T_floor within this factor of T_sat
  double intrinsic_below_ratio = 0.5;  // thermometer reaches this * T_sat
  double min_slope_sigmas = 3.0;     // interaction slope resolved
  thermometry::ThermometryOptions thermometry;
};

// Empty when usable, else what is wrong.
std::string validate(const VerdictOptions& options);

// The zero-field electron thermometer as the verdict sees it.
struct ElectronThermometer {
  thermometry::ThermometryResult result;  // of sigma_int (or raw, see below)
  bool weak_localization_removed = false; // false: raw sigma(0) (no L_phi model)
  thermometry::ThermometryResult raw;     // of sigma(0) as measured, for display
  double t_min_k = 0.0, t_max_k = 0.0;    // range of the thermometer's data
};

// L_phi(T) from a dephasing result: sqrt of 1/(L_sat^-2 + b T^p). Empty
// when the result carries no model (insufficient-data) or T is not > 0.
std::optional<double> model_lphi_m(const dephasing::DephasingResult& d, double temperature_k);

// sigma_int: the points with the weak-localization part removed as above.
// Empty when the result carries no model or alpha is not finite.
std::vector<thermometry::ZeroFieldPoint> interaction_part(
    std::span<const thermometry::ZeroFieldPoint> sigma0, const dephasing::DephasingResult& d,
    double alpha);

// Runs the thermometry on sigma_int when possible, on raw sigma(0) otherwise.
ElectronThermometer electron_thermometer(std::span<const thermometry::ZeroFieldPoint> sigma0,
                                         const dephasing::DephasingResult& d,
                                         const VerdictOptions& options = {});

struct Evidence {
  std::optional<double> t_sat_k, t_sat_err_k;      // from the dephasing fit
  std::optional<double> t_floor_k, t_floor_err_k;  // where sigma_int leaves ln T
  std::optional<double> floor_over_sat;            // T_floor / T_sat
  double thermometer_t_min_k = 0.0;
  double interaction_slope_kappa = 0.0, interaction_slope_kappa_err = 0.0;
  double departure_p_value = 1.0;
  bool weak_localization_removed = false;
};

struct Verdict {
  std::string error;  // non-empty: options refused (then all unknown)
  dephasing::State state = dephasing::State::insufficient_data;
  std::optional<bool> electrons_cooling;  // empty: unknown
  std::optional<Cause> likely_cause;      // only when saturating or saturated
  Evidence evidence;
  std::vector<std::string> notes;
};

// The decision rules above, from results already computed.
Verdict decide(const dephasing::DephasingResult& dephasing, const ElectronThermometer& thermometer,
               const VerdictOptions& options = {});

// electron_thermometer + decide.
Verdict assess(const dephasing::DephasingResult& dephasing,
               std::span<const thermometry::ZeroFieldPoint> sigma0,
               const VerdictOptions& options = {});

}  // namespace lphi::verdict
