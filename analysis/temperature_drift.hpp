// Whether a sweep taken while the temperature drifted still gives a usable
// L_phi, judged by what the drift does to L_phi rather than by a fixed spread
// of the temperature (analysis/PHYSICS.md, "Temperature drift during a sweep").
//
// The points that determine L_phi are those inside the fit's field window
// (|B - field offset| <= window). Over them:
//   T_eff     the mean temperature: the temperature L_phi is reported at;
//   delta     the change of the least-squares line T(t) over their time span
//             (a smooth drift: a still heater settling, a slow ramp);
//   excess    the scatter of T about that line beyond the thermometer's noise,
//             from 16 equal time bins: sqrt(max(0, S_b^2 - s_w^2 / m)) with
//             S_b the scatter of the bin means about the line, s_w the
//             pooled scatter within the bins and m the mean points per bin
//             (a bump or a step that a line does not follow).
// With L_phi ~ T^(-s) near T_eff (s = p/2 for 1/tau_phi ~ T^p; the caller
// passes the fitted exponent, or the expected one for the dimension), the
// relative change of the L_phi a drifting sweep measures from L_phi(T_eff) is
// estimated as
//   effect = s (s + 1) / 2 * (delta / (2 T_eff))^2 / 3 + s * excess / T_eff.
// The first term is the second-order bias of averaging L_phi over a linear
// drift symmetric about T_eff (its first-order part cancels: the mean of
// (1 + u)^(-s) over u uniform in [-a, a] is 1 + s (s + 1) a^2 / 6 + O(a^4));
// the second is the first-order effect of a change the line does not follow.
// The sweep is usable when effect <= the larger of the fit's relative error
// of L_phi and 0.5 % (the drift moves L_phi by less than its statistical
// error, or by a negligible amount; lphi's choice), and when the
// relative change over the window, |delta| / T_eff, is at most
// max_ramp_fraction (default 0.1): beyond that the sweep is a temperature
// ramp, during which the thermometer and the electrons need not agree (a
// thermal lag lphi cannot see; common practice is to measure on plateaus).
//
// Bad input (no points in the window, non-finite values, T <= 0, s < 0, a
// relative error <= 0) gives error set and usable = false. No I/O, no
// threads, deterministic.
#pragma once

#include <span>
#include <string>

namespace lphi::drift {

struct DriftPoint {
  double t_s = 0.0;
  double temperature_k = 0.0;
  double field_t = 0.0;  // the field reading
};

struct DriftOptions {
  double max_ramp_fraction = 0.1;
};

struct DriftJudgement {
  std::string error;             // non-empty: the input was refused
  double temperature_k = 0.0;    // T_eff
  double drift_k = 0.0;          // delta (signed: positive when warming)
  double excess_k = 0.0;         // excess scatter about the line
  double exponent_s = 0.0;       // s used
  double effect_rel = 0.0;       // estimated relative change of L_phi
  double lphi_rel_err = 0.0;     // what it is compared with
  std::size_t n_points = 0;      // points inside the window
  bool usable = false;
  std::string reason;            // "", "temperature-drift" or "temperature-ramp"
  std::string sentence;          // the judgement with its numbers; when usable, only
                                 // for a drift or excess of at least 0.5 % of T_eff
};

// points: the sweep's points in time order; field_centre_t: the field
// reading of the cusp (0 when not measured); window_t: the fit's window.
DriftJudgement judge(std::span<const DriftPoint> points, double field_centre_t, double window_t,
                     double lphi_rel_err, double exponent_s, const DriftOptions& options = {});

}  // namespace lphi::drift
