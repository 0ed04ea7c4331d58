// Zero-field thermometry: the electron-cooling check.
//
// In 2D, sigma(B=0) follows ln T while the electrons cool (weak localization
// plus electron-electron interaction; Lee and Ramakrishnan, Rev. Mod. Phys.
// 57, 287 (1985)): sigma(T) - sigma(T0) = (e^2/(pi h)) kappa ln(T/T0),
// kappa = alpha p + (1 - 3F/4). One unit of kappa is
// (e^2/(pi h)) ln 10 = 2.84e-5 S per decade of T. If the electrons stop
// cooling below some temperature T_floor, sigma flattens there. lphi fits
//   log model:   sigma = sigma_1 + kappa (e^2/(pi h)) ln T       (linear)
//   floor model: sigma = sigma_1 + kappa (e^2/(pi h)) (1/2) ln(T^2 + T_floor^2)
// (the floor model is the wire-heating form T_e^2 = T^2 + T_floor^2), both by
// weighted least squares in units of e^2/(pi h). The floor model is solved by
// Levenberg-Marquardt (Ceres, analytic derivatives) in (sigma_1, kappa,
// ln T_floor), started from the best point of a grid in ln T_floor with
// sigma_1 and kappa solved exactly at each grid point.
//
// Errors. With point errors the covariance is (J^T J)^-1; when no point has an
// error (all sigma_err_s == 0) all points weigh the same and the covariance is
// scaled by the reduced chi-square. Mixing known and unknown errors is refused.
//
// Departure. F-test of the nested models,
//   F = (chi2_log - chi2_floor) / (chi2_floor / (n - 3)),
// p_value = P(F(1, n-3) > F); departs when p_value < significance. T_floor is
// bounded to [T_min/1000, 10 T_max]: a fit ending within 1% of the lower bound
// means no floor is seen (F = 0, not departing); improvements below 1e-10 of
// the total sum of squares are rounding and count as none.
//
// Reported slope: kappa of the floor model when the departure is
// significant (the slope of the intrinsic ln T part), otherwise of the log
// model. floor_temperature_k only when departing, and not when T_floor ends
// on its upper bound (sigma flat over the whole range: departs, but the floor
// lies above the data by an amount they do not fix; a note says so).
//
// Input: temperatures finite and > 0, sigma finite, errors finite and >= 0;
// otherwise `error` names the point and the field and nothing is fitted.
// Repeated temperatures are allowed and count once towards min_points and
// the span. Fewer than min_points distinct temperatures or T_max/T_min below
// min_span_ratio: sufficient = false, nothing fitted.
//
// No I/O, no threads, deterministic.
#pragma once

#include <cstddef>
#include <optional>
#include <span>
#include <string>
#include <vector>

namespace lphi::thermometry {

struct ZeroFieldPoint {
  double temperature_k = 0.0;  // thermometer (phonon/bath) temperature
  double sigma_s = 0.0;        // sheet conductance at B = 0
  double sigma_err_s = 0.0;    // 0: unknown
};

struct ThermometryOptions {
  std::size_t min_points = 4;   // distinct temperatures; at least 4
  double min_span_ratio = 3.0;  // T_max / T_min, at least 1
  double significance = 0.01;   // F-test p-value below this: departs
  int max_iterations = 200;     // Levenberg-Marquardt
};

struct ThermometryResult {
  std::string error;                 // non-empty: input or options refused, and why
  bool sufficient = false;           // enough points and span to say anything
  double slope_kappa = 0.0;          // d sigma / d ln T in e^2/(pi h)
  double slope_kappa_err = 0.0;
  double sigma_1_s = 0.0;            // sigma at T = 1 K (log model, or floor model if departing)
  bool departs = false;              // significant flattening at low T
  std::optional<double> floor_temperature_k, floor_temperature_err_k;
  double chi2_log = 0.0, chi2_floor = 0.0;
  double f_statistic = 0.0;
  double p_value = 1.0;
  bool floor_at_boundary = false;    // T_floor ran to its lower bound
  bool converged = false;            // floor-model Levenberg-Marquardt converged
  bool errors_from_scatter = false;  // no point errors: scaled by chi2/dof
  std::size_t n_points = 0;
  std::size_t n_temperatures = 0;
  std::vector<std::string> notes;    // why something was not reported
};

ThermometryResult analyse_zero_field(std::span<const ZeroFieldPoint> points,
                                     const ThermometryOptions& options = {});

}  // namespace lphi::thermometry
