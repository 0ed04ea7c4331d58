// The temperature dependence of the phase-coherence length and the
// saturation verdict.
//
// Model: L_phi^-2 = L_sat^-2 + b T^p, i.e. 1/tau_phi = 1/tau_0 + A T^p with
// L_phi = sqrt(D tau_phi) (b = A/D); compared with the pure power law
// L_phi^-2 = b T^p. Both are fitted by weighted least squares in
// y = L_phi^-2 with sigma_y = 2 sigma_L / L^3 (Ceres, positive parameters in
// log space). Significance of the saturation term: F-test of the nested
// models (documented in dephasing.cpp); AIC is reported beside it.
//
// States (thresholds are options with documented defaults):
//   insufficient-data  fewer than min_points temperatures, or T_max/T_min
//                      below min_span_ratio
//   power-law          the saturation term is not significant
//   saturating         significant, lowest temperature >= saturated_ratio*T_sat
//   saturated          significant, lowest temperature <  saturated_ratio*T_sat
// T_sat = (L_sat^-2 / b)^(1/p): where the two terms of the rate are equal.
//
// AAK comparison (Altshuler, Aronov, Khmelnitsky, J. Phys. C 15, 7367 (1982),
// as quoted by Lin and Bird, J. Phys.: Condens. Matter 14, R501 (2002)):
// 2D: 1/tau_phi = (k_B T e^2 R_sq/(2 pi hbar^2)) ln(pi hbar/(e^2 R_sq));
// 1D: 1/tau_phi = [e^2 (R/L) sqrt(D) k_B T/(2 sqrt(2) hbar^2)]^(2/3).
#pragma once

#include <optional>
#include <span>
#include <string_view>

namespace lphi::dephasing {

struct LphiPoint {
  double temperature_k = 0.0;
  double lphi_m = 0.0;
  double lphi_err_m = 0.0;  // 0: unknown (then equal weights, scaled errors)
};

enum class State { insufficient_data, power_law, saturating, saturated };
std::string_view state_name(State s);  // "insufficient-data", ...

struct DephasingOptions {
  int dimension = 2;                 // 1, 2 or 3: sets the expected exponent
  std::size_t min_points = 5;
  double min_span_ratio = 3.0;       // T_max / T_min
  double significance = 0.01;        // F-test p-value below this: significant
  double saturated_ratio = 0.5;      // T_min < ratio * T_sat: saturated
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
  std::size_t n_points = 0;
  // Saturating model (valid when state != insufficient_data):
  std::optional<double> exponent_p, exponent_p_err;
  std::optional<double> prefactor_b, prefactor_b_err;  // m^-2 K^-p
  std::optional<double> lphi_sat_m, lphi_sat_err_m;
  std::optional<double> t_sat_k, t_sat_err_k;
  double chi2_saturating = 0.0, chi2_power_law = 0.0;
  double aic_saturating = 0.0, aic_power_law = 0.0;
  double f_statistic = 0.0, p_value = 1.0;
  PowerLawFit power_law;
  std::optional<double> aak_ratio;  // fitted b / AAK b, when D and R known
  std::optional<double> aak_rate_per_s_at_1k;
};

DephasingResult fit_dephasing(std::span<const LphiPoint> points,
                              const DephasingOptions& options = {});

// AAK Nyquist rates (s^-1), as above.
double aak_rate_2d_per_s(double temperature_k, double sheet_resistance_ohm);
double aak_rate_1d_per_s(double temperature_k, double resistance_per_length_ohm_m,
                         double diffusion_m2s);

}  // namespace lphi::dephasing
