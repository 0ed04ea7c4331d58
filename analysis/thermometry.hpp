// Zero-field thermometry: the electron-cooling check.
//
// In 2D, sigma(B=0) follows ln T while the electrons cool (weak localization
// plus electron-electron interaction; Lee and Ramakrishnan, Rev. Mod. Phys.
// 57, 287 (1985)): sigma(T) - sigma(T0) = (e^2/(pi h)) kappa ln(T/T0),
// kappa = alpha p + (1 - 3F/4). If the electrons stop cooling below some
// temperature T_floor, sigma flattens there. lphi fits
//   sigma = sigma_1 + kappa (e^2/(pi h)) (1/2) ln(T^2 + T_floor^2)
// (the wire-heating form T_e^2 = T^2 + T_floor^2) against the pure
// logarithm, and calls the departure significant by an F-test.
#pragma once

#include <optional>
#include <span>

namespace lphi::thermometry {

struct ZeroFieldPoint {
  double temperature_k = 0.0;  // thermometer (phonon/bath) temperature
  double sigma_s = 0.0;        // sheet conductance at B = 0
  double sigma_err_s = 0.0;    // 0: unknown
};

struct ThermometryOptions {
  std::size_t min_points = 4;
  double min_span_ratio = 3.0;
  double significance = 0.01;
};

struct ThermometryResult {
  bool sufficient = false;           // enough points and span to say anything
  double slope_kappa = 0.0;          // d sigma / d ln T in e^2/(pi h)
  double slope_kappa_err = 0.0;
  bool departs = false;              // significant flattening at low T
  std::optional<double> floor_temperature_k, floor_temperature_err_k;
  double p_value = 1.0;
  std::size_t n_points = 0;
};

ThermometryResult analyse_zero_field(std::span<const ZeroFieldPoint> points,
                                     const ThermometryOptions& options = {});

}  // namespace lphi::thermometry
