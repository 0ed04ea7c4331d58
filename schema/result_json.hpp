// The JSON objects lphi shows for analysis results: one sweep fit (the keys
// of `lphi fit --json`) and one L_phi(T) fit (the keys of `lphi dephasing
// --json`). One writer for each, shared by the offline commands, the live
// analysis, the control replies and the event socket, so that the same
// result reads the same everywhere. Non-finite or absent optional values are
// written as null.
#pragma once

#include <nlohmann/json.hpp>
#include <optional>

#include "analysis/conductance.hpp"
#include "analysis/dephasing.hpp"
#include "analysis/sweep_analysis.hpp"
#include "analysis/sweep_fit.hpp"

namespace lphi::schema {

nlohmann::json optional_json(const std::optional<double>& value);

// model, lphi_m, lphi_err_m, alpha, alpha_err, lso_m, lso_err_m, chi2,
// chi2_red, n_points, field_window_t, b_phi_t, converged, termination,
// iterations, flags, offset_s, offset_err_s, background_s_per_t2,
// background_err_s_per_t2, odd_s_per_t, odd_err_s_per_t, corr_alpha_lphi,
// corr_lso_lphi, sigma0_s,
// sigma0_err_s, rsq0_ohm, max_field_t.
nlohmann::json sweep_fit_json(const fit::SweepFitResult& result,
                              const conductance::PreparedSweep& prepared);

// One sweep analysis (sweep::analyze), the keys of `lphi fit --json` and of
// lphid's fits: those of sweep_fit_json with the analysis's own in place of
// the prepared ones, all in SI units named in the key:
//   chi2_red (against the sweep's own noise; null when unknown),
//   chi2_red_quantum (fit_sweep's, in (e^2/(pi h))^2), point_noise_s,
//   error_scale, sigma0_s and sigma0_err_s and rsq0_ohm and rsq0_err_ohm
//   (with the fitted offset), symmetrized, field_offset_t, field_offset_err_t,
//   remanent_field_t, field_lag_s, field_lag_err_s, sweep_rate_t_per_s,
//   time_constant_s, max_sweep_rate_t_per_s, too_fast, offset_large,
//   n_spikes, legs [{centre_t, centre_err_t, rate_t_per_s, direction,
//   n_readings, n_spikes, centred, reason}], coverage {ok, reason, sentence,
//   advice}, flat, units_suspect, unit_hint, usable, reasons [{name,
//   sentence}], advice, temperature_k, error (the fit's, "" when it fitted).
nlohmann::json sweep_analysis_json(const sweep::Analysis& analysis);

// state, n_points, exponent_p, exponent_p_err, prefactor_b, prefactor_b_err,
// lphi_sat_m, lphi_sat_err_m, t_sat_k, t_sat_err_k, chi2_saturating,
// chi2_power_law, aic_saturating, aic_power_law, f_statistic, p_value,
// power_law{...}, n_temperatures, errors_from_scatter, expected_exponent,
// reference_temperature_k, saturation_at_boundary, converged, notes,
// aak_ratio, aak_ratio_err, aak_rate_per_s_at_1k.
nlohmann::json dephasing_json(const dephasing::DephasingResult& result);

}  // namespace lphi::schema
