// Which sweep fits enter L_phi(T), beyond the sweep analysis's own judgement
// (analysis/sweep_analysis.hpp): what the temperature did during the sweep,
// and whether the fit agrees with the other sweeps of its plateau. Used by
// SamplePipeline (sample_pipeline.hpp) on every fit it makes.
//
// Temperature. The drift of the thermometer over the points that determine
// L_phi is judged by its effect on L_phi (analysis/temperature_drift.hpp and
// analysis/PHYSICS.md, "Temperature drift during a sweep"), with the
// exponent s = |d ln L_phi / d ln T| taken as the larger of the one expected
// for the model's dimension (1/1/tau_phi ~ T^p with p = 1 in 2D, 2/3 in 1D,
// 3/2 in 3D: s = p/2) and half the exponent p the sample's L_phi(T) fit gives
// so far (when it is finite and in (0, 4]). The fit is reported at the mean
// temperature of those points (T_eff), also for a fit read back from the
// store, so that a restart reports the same temperature. A fresh fit whose
// drift moves L_phi by more than its error, or whose temperature ramps by
// more than 10 % over its window, is kept out of L_phi(T) with the numbers
// ("temperature-drift: ...", "temperature-ramp: ..."); a usable drifting
// sweep keeps its statement ("temperature-drift-within-error: ..."). When
// the drift cannot be judged (a failed fit, no error) a sweep the segmenter
// found straddling a temperature change stays out ("temperature-unstable").
//
// Plateau agreement. A fresh fit that is used is compared with the used fits
// of its cooldown on the same temperature run or within 1 % in temperature
// (each moved to this fit's temperature with the same exponent s):
//   z = (L - L_mean) / sqrt(sigma^2 + sigma_mean^2)
// with L_mean their inverse-variance weighted mean and the errors scaled by
// each fit's error_scale. |z| > 3 flags it ("disagrees-with-plateau: ..."),
// and keeps it out of L_phi(T) when at least two earlier sweeps make the
// mean (with one, lphi cannot tell which of the two is off).
//
// Errors for L_phi(T): lphi_err_m times the fit's error_scale (the result
// JSON's "error_scale", sqrt(max(1, chi2_red)) against the sweep's own
// noise; 1 when absent).
//
// Pure functions of their arguments; no I/O, no threads.
#pragma once

#include <optional>
#include <vector>

#include "analysis/segmenter.hpp"
#include "daemon/live/sample_pipeline.hpp"

namespace lphi::live {

// s = p/2 for the dimension's expected p (2: 0.5, 1: 1/3, 3: 0.75).
double expected_lphi_exponent(int dimension);

// The exponent used for the drift: the larger of the expected one and half
// the fitted p when that is finite and in (0, 4].
double drift_exponent(int dimension, std::optional<double> fitted_p);

// The L_phi error that enters L_phi(T).
double scaled_lphi_error_m(const FitRecord& fit);

// Sets fit.temperature_k to T_eff when the drift can be judged; when
// `decide` (a fresh fit), also decides used_in_dephasing and adds the
// quality reasons and the result keys "temperature_eff_k",
// "temperature_drift_k", "temperature_drift_effect" and "temperature_note".
void judge_temperature(FitRecord& fit, const std::vector<const segment::Sweep*>& sweeps,
                       double exponent_s, bool decide);

// Compares a fresh, used fit with `earlier` (the sample's fits so far).
void compare_with_plateau(FitRecord& fit, const std::vector<FitRecord>& earlier, double exponent_s);

}  // namespace lphi::live
