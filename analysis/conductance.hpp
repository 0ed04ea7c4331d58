// From lock-in readings to the sheet magnetoconductance of one field sweep.
//
// Four-terminal, current-biased measurement (common practice):
//   R = V_x / (gain * I)   (rms in-phase voltage over rms current; gain is the
//                           voltage preamplifier's, 1 when there is none)
//   R_sq = R / N           (N = L/W, the number of squares between the probes)
//   sigma_sq = 1/R_sq, or with a Hall component
//   sigma_xx = rho_xx / (rho_xx^2 + rho_xy^2).
// Symmetrizing in B, rho(B) -> [rho(B) + rho(-B)]/2, removes Hall pickup from
// misaligned contacts (Onsager reciprocity).
// Delta sigma(B) = sigma(B) - sigma(0), with sigma(0) estimated robustly from
// the points nearest zero field, never from a single noisy point.
#pragma once

#include <span>
#include <string>
#include <vector>

namespace lphi::conductance {

// The conversions return NaN where the quantity is undefined (zero current or
// gain, squares <= 0, zero resistance), so that a bad reading is refused by
// prepare_sweep as non-finite rather than turned into a plausible number.
double resistance_ohm(double lockin_x_v, double current_a, double gain = 1.0);
double sheet_resistance_ohm(double resistance_ohm, double squares);
double sheet_conductance_s(double sheet_resistance_ohm);
// Tensor inversion: sigma_xx from rho_xx and rho_xy (both per square, ohm).
double sheet_conductance_xx_s(double rho_xx_ohm, double rho_xy_ohm);

struct FieldPoint {
  double field_t = 0.0;
  double value = 0.0;  // a sheet resistance (ohm) or a sheet conductance (S)
};

// One point of a prepared sweep: |B| and Delta sigma_sq in siemens.
struct DeltaSigmaPoint {
  double field_t = 0.0;        // >= 0
  double delta_sigma_s = 0.0;
};

struct PreparedSweep {
  std::vector<DeltaSigmaPoint> points;  // sorted by field, field >= 0
  double sigma0_s = 0.0;                // robust estimate of sigma_sq(B = 0)
  double sigma0_err_s = 0.0;            // its standard error
  double rsq0_ohm = 0.0;                // 1/sigma0_s
  double max_field_t = 0.0;             // largest |B| kept after symmetrizing
  std::size_t n_input = 0;
  // false: a one-sided sweep, not mirrored (PrepareOptions::allow_one_sided);
  // Delta sigma then still holds any odd-in-B part, which the fit must carry.
  bool symmetrized = true;
  double field_offset_t = 0.0;          // the offset the fields were shifted by
};

struct PrepareOptions {
  // The field reading at which the sample sees zero field
  // (analysis/field_axis.hpp's sign convention): every field is shifted to
  // B_reading - field_offset_t before symmetrizing.
  double field_offset_t = 0.0;
  // A sweep with fewer than 8 points on one side of zero field (from 0 to +B,
  // a unipolar magnet) is prepared from the side it has, without mirroring,
  // instead of being refused.
  bool allow_one_sided = false;
};

struct PrepareStatus {
  bool ok = false;
  std::string error;  // set when !ok: what was wrong with the data
};

// Symmetrizes sheet resistances rho(B) measured on both sides of zero field,
// converts to sheet conductance and subtracts the robust sigma(0).
//
// Readings repeated at one field are averaged. Symmetrized points sit at the
// measured fields of the side with more points (B > 0 on a tie); the other
// branch is interpolated at each mirrored field (four-point cubic through the
// two readings on each side: linear interpolation errs by h^2 f''/8, which
// near the cusp is several times the noise when the field step h is half of
// B_phi or more), and fields whose
// mirror lies outside the measured range are dropped. A reading at exactly
// B = 0 is kept as it is.
//
// sigma(0) comes from a robust (Tukey-biweight, iteratively reweighted) least-
// squares fit of a + c B^2 to the innermost points (a fifth of them, between
// 16 and 25; all when there are fewer), each weighted by the number of
// readings averaged into it; sigma0_err_s is the standard error of a. One
// wild reading near zero field does not move it.
//
// Fails (with a message naming the problem) when the sweep is empty, contains
// a non-finite field or value or a sheet resistance <= 0, does not reach both
// signs of B, or has fewer than 8 points on either side.
PrepareStatus prepare_sweep(std::span<const FieldPoint> sheet_resistance_ohm,
                            PreparedSweep& out);
// The same with the fields shifted by options.field_offset_t first, and a
// one-sided sweep prepared from its one side when options.allow_one_sided
// (symmetrized = false; points at |B| of that side; sigma(0) from the same
// robust fit of its innermost points; needs at least 8 points on that side).
PrepareStatus prepare_sweep(std::span<const FieldPoint> sheet_resistance_ohm,
                            const PrepareOptions& options, PreparedSweep& out);

// Isolated spikes in one leg (readings in time order, the field monotonic),
// found before symmetrizing so that one wild reading moves neither the
// centre nor its mirror image. A detrended Hampel identifier (F. R. Hampel,
// J. Am. Stat. Assoc. 69, 383 (1974); analysis/PHYSICS.md, "The field axis"):
// each reading with three neighbours on each side (two at the ends of the
// leg) is compared with the least-squares quadratic in B through those
// neighbours; the residual, divided by its standard deviation for unit noise
// (sqrt(1 + the quadratic's prediction variance)), is judged against
// threshold times the leg's robust scale, 1.4826 * median |residual|
// (floored at 1e-9 of the median reading, so that round-off in noise-free
// data is not a spike). A reading above it is a spike only if the readings
// beside it, refitted without it, are not also off by a third of its
// residual: a curved stretch of the curve (the weak-localization cusp
// sampled coarsely) moves its neighbours too, a spike does not.
struct SpikeRejection {
  std::vector<FieldPoint> kept;        // in the leg's order
  std::vector<std::size_t> dropped;    // indices into the leg
  double noise_scale = 0.0;            // the robust scale used (the readings' unit)
};
SpikeRejection reject_spikes(std::span<const FieldPoint> leg, double threshold = 6.0);

// The standard deviation of the noise on the points of a prepared sweep,
// estimated without any model of the curve: the difference-based estimator
// of T. Gasser, L. Sroka and C. Jennen-Steinmetz, Biometrika 73, 625 (1986).
// Each inner point is compared with the straight line through its two
// neighbours,
//   e_i = (a_i y_(i-1) + b_i y_(i+1) - y_i) / sqrt(a_i^2 + b_i^2 + 1),
//   a_i = (B_(i+1) - B_i) / (B_(i+1) - B_(i-1)),  b_i = 1 - a_i,
// which for white noise of variance s^2 has variance s^2 whatever the
// spacing, while a smooth curve contributes only its second derivative
// times the spacing squared. The scale is taken robustly: s = 1.4826 *
// median |e_i| (1.4826 = 1/Phi^-1(3/4), the consistency factor of the
// median absolute deviation for a normal distribution), so an odd spike
// does not inflate it. Needs at least 3 points with distinct fields; returns
// 0 otherwise (unknown). The points must be sorted by field (as
// prepare_sweep leaves them).
double point_noise_s(std::span<const DeltaSigmaPoint> points);

// The noise of each point, for sweeps whose noise changes along the field.
// A field reading's own noise dB turns into a conductance error of
// (d sigma/dB) dB, which is largest near zero field at low temperature, where
// the weak-localization curve is steepest; the lock-in's noise is the same
// everywhere. One number for the whole sweep (point_noise_s, a median) then
// describes the flat far-field points and understates the noise where the
// fit's information is. Here the scale is local: the same difference
// residuals e_i as point_noise_s, and for point i the robust scale
// 1.4826 * median |e_j| over the 2 * half_width + 1 residuals centred on it
// (the window slides inward at the ends of the sweep, so that every point
// gets a full window when the sweep has one). This is the local variant of
// difference-based variance-function estimation (H.-G. Mueller and
// U. Stadtmueller, Ann. Statist. 15, 610 (1987), who average squared
// pseudo-residuals locally; the median here keeps a spike from raising its
// neighbours' noise). Same length as points; all zeros when point_noise_s
// would return 0. half_width must be at least 1.
std::vector<double> point_noise_profile_s(std::span<const DeltaSigmaPoint> points,
                                          std::size_t half_width = 15);

}  // namespace lphi::conductance
