// The temperature dependence of the phase-coherence length and the
// saturation verdict.
//
// Model: L_phi^-2 = L_sat^-2 + b T^p, i.e. 1/tau_phi = 1/tau_0 + A T^p with
// L_phi = sqrt(D tau_phi) (b = A/D); compared with the pure power law
// L_phi^-2 = b T^p. The exponent p is free in both.
//
// Estimator. Weighted least squares in y = L_phi^-2 with
// sigma_y = 2 sigma_L / L^3 (first-order propagation from the sweep fit's
// error on L_phi). When no point carries an error (all lphi_err_m == 0) every
// point gets the same relative error in y (sigma_y = y), and the covariance
// is scaled by the reduced chi-square, so the errors then come from the
// scatter of the data. Mixing known and unknown errors is refused.
// Both models are solved by Levenberg-Marquardt (Ceres, analytic
// derivatives) in the parameters ln(L_sat^-2), ln(b T_ref^p) and p, where
// T_ref is the geometric mean of the measured temperatures (this centring
// keeps the prefactor and the exponent nearly uncorrelated); results are
// converted back to b in m^-2 K^-p with the full covariance.
//
// Start values come from the data: p and ln b from a straight-line fit of
// ln y against ln T over the upper half of the temperatures, L_sat^-2 from the
// excess of y over that line at the lowest quarter of the temperatures. A
// second start at the power-law solution with a small saturation term is also
// run; the lower chi-square wins.
//
// Boundary. When the data show no saturation the best L_sat^-2 runs to zero
// (the saturating model degenerates to the power law). ln(L_sat^-2) has a
// lower bound ln(1e-8 * min(y)); a fit ending with L_sat^-2 below
// 1e-6 * min(y) (on or near that bound: it then changes no model value by a
// part in a million), or not improving on the power law, counts as "no
// saturation term": F = 0, p_value = 1, and no L_sat or T_sat is reported.
// About half of all tables without saturation end there, because the
// unconstrained optimum would have L_sat^-2 < 0.
//
// Significance of the saturation term: F-test of the nested models,
//   F = (chi2_pl - chi2_sat) / (chi2_sat / (n - 3)),
// p_value = P(F(1, n-3) > F) (Boost.Math fisher_f). An improvement below
// 1e-10 of the total weighted sum of squares is numerical noise and counts as
// none. AIC is reported beside it: chi2 + 2k with known errors, and
// n ln(chi2/n) + 2k when the errors come from the scatter (k = 3 or 2).
//
// States (thresholds are options with the defaults below):
//   insufficient-data  fewer than min_points distinct temperatures, or
//                      T_max/T_min below min_span_ratio, or input refused
//                      (then `error` says why)
//   power-law          the saturation term is not significant
//                      (p_value >= significance, or at the boundary)
//   saturating         significant, lowest temperature >= saturated_ratio*T_sat
//   saturated          significant, lowest temperature <  saturated_ratio*T_sat
// T_sat = (L_sat^-2 / b)^(1/p): where the two terms of the rate are equal.
//
// No temperature dependence. The constant model y = L_sat^-2 is the
// saturating model with b -> 0; when it is not rejected (F-test, F(2, n-3),
// same significance) the flag temperature_independent is set. If the
// saturation term is significant as well, L_phi is flat over the whole range:
// the state is saturated with L_sat from the weighted mean of y, and neither
// exponent, prefactor nor T_sat is reported (T_sat lies above the data, by an
// amount the data do not fix). T_sat is also withheld when the exponent ends
// on one of its bounds [0.01, 10].
// Its error propagates the full 3x3 covariance through the analytic
// derivatives of ln T_sat = ln T_ref + (ln L_sat^-2 - ln(b T_ref^p)) / p.
//
// Input: temperatures must be finite and > 0, L_phi finite and > 0, errors
// finite and >= 0; otherwise the result carries `error` naming the point and
// the field, and state insufficient-data. Repeated temperatures are allowed
// (each point is an independent measurement) but count once towards
// min_points and the span.
//
// AAK comparison (Altshuler, Aronov, Khmelnitsky, J. Phys. C 15, 7367 (1982),
// as quoted by Lin and Bird, J. Phys.: Condens. Matter 14, R501 (2002)):
// 2D: 1/tau_phi = (k_B T e^2 R_sq/(2 pi hbar^2)) ln(pi hbar/(e^2 R_sq));
// 1D: 1/tau_phi = [e^2 (R/L) sqrt(D) k_B T/(2 sqrt(2) hbar^2)]^(2/3).
// With D and R_sq (dimension 2) or R/L (dimension 1) given,
//   aak_ratio = (fitted b T_ref^p) / (AAK rate(T_ref) / D)
// at T_ref, the geometric mean of the measured temperatures: the fitted p
// need not equal the AAK exponent, so the two are compared where the data
// pin the power-law term best. The fitted term is the one of the model the
// verdict selected. Agreement within a factor of about 2 counts as agreement
// (the definitions of g inside the 2D logarithm differ between papers).
//
// No I/O, no threads, deterministic.
#pragma once

#include <cstddef>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

namespace lphi::dephasing {

struct LphiPoint {
  double temperature_k = 0.0;
  double lphi_m = 0.0;
  double lphi_err_m = 0.0;  // 0: unknown (then equal weights, scaled errors)
};

enum class State { insufficient_data, power_law, saturating, saturated };
std::string_view state_name(State s);  // "insufficient-data", ...

struct DephasingOptions {
  int dimension = 2;                 // 1, 2 or 3: expected exponent, AAK form
  std::size_t min_points = 5;        // distinct temperatures; at least 4
  double min_span_ratio = 3.0;       // T_max / T_min, at least 1
  double significance = 0.01;        // F-test p-value below this: significant
  double saturated_ratio = 0.5;      // T_min < ratio * T_sat: saturated
  int max_iterations = 200;          // per Levenberg-Marquardt run
  // For the AAK comparison (all optional):
  std::optional<double> diffusion_m2s;
  std::optional<double> sheet_resistance_ohm;         // 2D
  std::optional<double> resistance_per_length_ohm_m;  // 1D
};

struct PowerLawFit {
  double b = 0.0, b_err = 0.0;  // m^-2 K^-p
  double p = 0.0, p_err = 0.0;
  double chi2 = 0.0;
  bool converged = false;
};

struct DephasingResult {
  State state = State::insufficient_data;
  std::string error;  // non-empty: input or options refused, and why
  std::size_t n_points = 0;
  std::size_t n_temperatures = 0;  // distinct temperatures
  bool errors_from_scatter = false;  // no point errors: scaled by chi2/dof
  double expected_exponent = 1.0;    // 2/3 (1D), 1 (2D), 3/2 (3D)
  double reference_temperature_k = 0.0;  // T_ref, geometric mean
  // Exponent and prefactor of the model the verdict selected: the saturating
  // model when the saturation term is significant, else the power law
  // (set when state != insufficient_data, except for flat data, above).
  std::optional<double> exponent_p, exponent_p_err;
  std::optional<double> prefactor_b, prefactor_b_err;  // m^-2 K^-p
  // Only when the saturation term is significant:
  std::optional<double> lphi_sat_m, lphi_sat_err_m;
  std::optional<double> t_sat_k, t_sat_err_k;
  double chi2_saturating = 0.0, chi2_power_law = 0.0;
  double aic_saturating = 0.0, aic_power_law = 0.0;
  double f_statistic = 0.0, p_value = 1.0;
  bool saturation_at_boundary = false;  // L_sat^-2 ran to zero
  bool temperature_independent = false; // no T dependence resolved (see above)
  bool converged = false;               // both fits converged
  PowerLawFit power_law;
  std::optional<double> aak_ratio, aak_ratio_err;  // fitted / AAK at T_ref
  std::optional<double> aak_rate_per_s_at_1k;
  std::vector<std::string> notes;  // why something was not reported, etc.
};

DephasingResult fit_dephasing(std::span<const LphiPoint> points,
                              const DephasingOptions& options = {});

// AAK Nyquist rates (s^-1), as above. Quiet NaN outside the formulas' domain:
// a non-positive or non-finite argument, or (2D) R_sq >= pi hbar/e^2 = R_K/2,
// where the logarithm is no longer positive (no longer weakly disordered).
double aak_rate_2d_per_s(double temperature_k, double sheet_resistance_ohm);
double aak_rate_1d_per_s(double temperature_k, double resistance_per_length_ohm_m,
                         double diffusion_m2s);

// Expected electron-electron exponent for a dimension: 2/3, 1, 3/2 for 1, 2,
// 3; NaN otherwise.
double expected_exponent(int dimension);

// F-test of nested least-squares models. chi2_restricted (fewer parameters)
// and chi2_full (k_full parameters) over n points:
//   F = (chi2_restricted - chi2_full) / extra / (chi2_full / (n - k_full)),
// extra = the number of additional parameters. An improvement below
// 1e-10 * total_sum_of_squares is taken as none (F = 0); a perfect full fit
// with a real improvement gives F = +inf and p = 0.
struct FTest {
  double f_statistic = 0.0;
  double p_value = 1.0;
};
FTest nested_f_test(double chi2_restricted, double chi2_full, std::size_t n,
                    std::size_t k_full, std::size_t extra,
                    double total_sum_of_squares);

// Upper tail P(X > f) of the F(d1, d2) distribution (Boost.Math). f >= 0
// finite, d1, d2 > 0; NaN otherwise.
double f_distribution_upper_tail(double f, double d1, double d2);

}  // namespace lphi::dephasing
