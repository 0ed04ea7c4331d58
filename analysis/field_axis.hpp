// The field axis of a sweep: where the weak-localization cusp lies on the
// field reading, what part of that is a remanent field and what part a lag,
// whether the sweep was slow enough for the lock-in, and whether its points
// resolve the cusp at all (analysis/PHYSICS.md, "The field axis").
//
// Sign convention (used everywhere in lphi): the field offset of a leg is the
// field READING at which the sample sees zero field, the centre of symmetry
// of its magnetoresistance. The field the sample sees is
//   B_true = B_reading - offset.
// A remanent field B_rem (the field the sample sees while the reading is
// zero, e.g. flux trapped in a superconducting magnet) puts the cusp at the
// reading -B_rem: remanent_field_t = -common offset.
//
// A lag makes the up and down legs' centres differ in sign. When the
// resistance lags the field (the lock-in's time constant tau while sweeping
// at rate r = |dB/dt|), the resistance read at B_reading belongs to the field
// r tau earlier, so the cusp appears at +r tau on an up leg and -r tau on a
// down leg. When the field reading lags the magnet by delta, the cusp appears
// at -r delta on an up leg and +r delta on a down leg. Hence
//   common offset   = (c_up + c_down) / 2,
//   opposite part   = (c_up - c_down) / 2 = r * delay,
//   delay_s         = opposite / r: positive when the resistance lags the
//                     field reading, negative when the reading lags the magnet.
//
// Pure functions: no I/O, no threads, deterministic, thread-safe.
#pragma once

#include <cstddef>
#include <limits>
#include <span>
#include <string>
#include <vector>

namespace lphi::field_axis {

inline constexpr double kUnknown = std::numeric_limits<double>::quiet_NaN();

// One reading of a leg: the time (NaN when unknown), the field reading and the
// sheet resistance (ohm; any quantity whose cusp is to be centred works).
struct LegPoint {
  double t_s = kUnknown;
  double field_t = 0.0;
  double value = 0.0;
};

// Where a leg's cusp lies.
struct Centre {
  bool ok = false;
  std::string reason;           // when !ok: why no centre is given (a sentence)
  double centre_t = kUnknown;   // the field reading of the centre of symmetry
  double centre_err_t = kUnknown;  // its standard error
  double rate_t_per_s = kUnknown;  // |dB/dt| near zero field; NaN when times are unknown
  double direction = 0.0;       // +1 field rising in time order, -1 falling, 0 unknown
  std::size_t n_differences = 0;  // mirrored differences the centre rests on
};

// The centre of symmetry of one leg (one monotonic traverse, in time order).
//
// For a trial centre c the differences d(b) = f(c + b) - f(c - b) are taken
// on a fixed grid b_k = k h (h the leg's median field step) out to 3/4 of the
// leg's shorter reach, for trial centres within +-1/4 of it (so that the
// cusp lies well inside the differences' reach: about a smooth stretch of
// the curve d(b) = 2 f'(c) b + O(b^3) is nearly linear and says little), f interpolated between readings with the
// cubic of analysis/internal/cubic_interpolation.hpp. An odd-in-B part about
// any centre (Hall pickup from misaligned contacts; a lock-in gain drifting
// linearly in time, which on a monotonic leg is linear in B) leaves d exactly
// linear in b (d = 2 beta b, through the origin: d(0) = 0 for any curve), so
// the least-squares line beta b is removed and the remaining sum
// of squares S(c) is minimised: a grid over c (spacing h/2, at most 2000
// trials), then a least-squares parabola through S on 41 trials spanning
// +-3 standard errors of the first estimate and at least +-2 field steps,
// recentred until its vertex stays in the middle half. The centre is the
// parabola's vertex.
//
// Standard error: near the minimum S(c) = S_min + G (c - c0)^2; with the
// differences divided by their noise, s^2 = S_min / (K - 2) estimates the
// readings' noise variance (K differences, the line's slope and c), and for
// independent differences var(c) = s^2 / G. Two corrections: neighbouring
// differences share readings through the interpolation, which inflates the
// variance by |sum_k g_k a_k|^2 / sum_k g_k^2 (g_k = dz_k/dc taken over +-2
// field steps, a_k the reading weights of difference k); and S carries a
// ripple on the scale of one field step (the interpolation moving between
// noisy readings), whose scatter about the parabola adds var(a1) / (2 a2)^2
// (trials within one step counted as one). The test checks the pull
// distribution by Monte-Carlo over 200 seeds (sd within 20 % of 1 at
// L_phi = 1 um and 300 nm); at a signal-to-noise so low that one field step
// changes the curve by less than the noise, the error is understated (pulls
// of sd 1.9 at 2 ohm noise on a 0.1 mT step at L_phi = 1 um).
//
// Refuses (ok = false, reason set; never a made-up centre) when the leg has
// a non-finite reading, does not cross zero field, has fewer than
// kMinPointsPerSide readings on either side of zero, or has no curvature to
// centre on: S(c) without a minimum, or a centre uncertain by more than a
// tenth of the leg's shorter reach (a flat sweep without a cusp above the
// noise; also when, across the trial centres, S grows by less than
// max(25, 8 sqrt(2K)) noise variances above its minimum, which is how far the
// smallest of many trials falls below their mean from noise alone).
//
// The rate near zero is the slope of a least-squares line of B against t over
// the readings with |B| within a quarter of the shorter reach (at least the 5
// nearest zero field).
inline constexpr std::size_t kMinPointsPerSide = 5;

// A leg of more readings is centred on its means over this many equal field
// bins (the search's cost grows as the square of the points: a 10 000-reading
// leg took seconds). Its error is the larger of the one from the curvature of
// the mirrored differences and half the difference of the centres of the two
// interleaved halves of the (binned) readings, which also holds where the
// curvature's error understates the scatter (a cusp much wider than a step).
inline constexpr std::size_t kMaxCentringPoints = 2000;
Centre find_centre(std::span<const LegPoint> leg);

// Remanence and lag from an up and a down leg of the same plateau.
struct Split {
  double offset_t = kUnknown, offset_err_t = kUnknown;          // common part
  double remanent_field_t = kUnknown;                           // -offset
  double opposite_t = kUnknown, opposite_err_t = kUnknown;      // (c_up - c_down)/2
  double rate_t_per_s = kUnknown;                               // mean of the legs' rates
  double delay_s = kUnknown, delay_err_s = kUnknown;            // opposite / rate
};
// up: the leg whose field rises in time, down: the one whose field falls; both
// ok. delay_s is NaN when neither leg's rate is known.
Split split(const Centre& up, const Centre& down);

// Is the sweep slow enough for the lock-in's time constant?
//
// A first-order filter with time constant tau, swept at rate r, shifts the
// curve by r tau along the field (the shift is removed by centring) and
// smooths it over a field interval r tau. Against the cusp's width B_phi the
// smoothing distorts the curve by a relative amount of order (r tau /
// B_phi)^2 (the shift is first order and corrected; the smoothing is the
// curve's second moment under the filter); at r tau = 0.1 B_phi that is at
// most 1 % (the test integrates the filter exactly and measures 0.2 % of the
// weak-localization signal within 3 B_phi), about the statistical error of a
// good sweep, so the sweep is flagged too fast above it.
inline constexpr double kMaxLagFractionOfBphi = 0.1;
struct RateCheck {
  bool known = false;            // rate, tau and B_phi all known and positive
  bool too_fast = false;         // r tau > kMaxLagFractionOfBphi * B_phi
  double shift_t = kUnknown;     // r tau
  double max_rate_t_per_s = kUnknown;  // kMaxLagFractionOfBphi * B_phi / tau
};
RateCheck rate_check(double rate_t_per_s, double time_constant_s, double b_phi_t);

// Do the points resolve the cusp?
struct CoverageOptions {
  // A gap across zero field larger than this many typical field steps is a
  // hole (the leg's median step; the largest over the legs).
  double hole_factor = 10.0;
  // Readings needed within near_fraction of the shorter reach of zero field
  // before fitting, and within 3 B_phi of zero field after it (both signs and
  // all legs used counted together).
  double near_fraction = 0.1;
  std::size_t min_near_zero = 5;
  std::size_t min_within_3_bphi = 5;
};

struct Coverage {
  bool ok = true;
  std::string reason;   // kebab-case name when !ok: "hole-across-zero", ...
  std::string sentence; // the reason with its numbers
  std::string advice;   // one line the operator can act on
  double hole_low_t = kUnknown, hole_high_t = kUnknown;  // the gap, when there is one
  std::size_t n_near_zero = 0;
};

// Before fitting: fields_t holds each leg's field readings already shifted by
// the centre (B_true), one vector per leg.
Coverage coverage_before(std::span<const std::vector<double>> legs_field_t,
                         const CoverageOptions& options = {});
// After fitting, with the fitted B_phi: fewer than min_within_3_bphi readings
// with |B_true| <= 3 B_phi => not resolved.
Coverage coverage_after(std::span<const std::vector<double>> legs_field_t, double b_phi_t,
                        const CoverageOptions& options = {});

}  // namespace lphi::field_axis
