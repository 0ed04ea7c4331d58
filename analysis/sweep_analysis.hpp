// The one analysis of a magnetoconductance sweep, used by the live pipeline
// and by `lphi fit`: from one or two legs of readings to L_phi, or to the
// reasons it must not be trusted (analysis/PHYSICS.md, "The field axis" and
// "The one-sweep fit").
//
// Steps, in order:
//   1. refuse bad input (no legs, more than two, an empty leg, a non-finite
//      field or a sheet resistance <= 0: the error names the leg and reading);
//   2. drop isolated spikes from each leg (conductance::reject_spikes);
//   3. centre each leg (field_axis::find_centre) and shift its fields by its
//      own centre when that is significant (kSignificantOffset standard
//      errors), which removes a remanent field and a lag alike; with an up
//      and a down leg, split the centres into remanence and lag;
//   4. coverage before fitting (field_axis::coverage_before): a hole across
//      zero field or too few readings near it => no fit;
//   5. prepare (conductance::prepare_sweep: symmetrized, or one-sided from the
//      side that exists) and fit (fit::fit_sweep);
//   6. judge: chi2_red against the sweep's own noise
//      (fit::chi2_red_against_noise), coverage within 3 B_phi, the sweep rate
//      against the lock-in's time constant (field_axis::rate_check), the
//      offset and its error against B_phi, the fit's flags, and the units.
//
// `usable` says whether the length may enter L_phi(T), `reasons` why not (or
// what was noted), each a stable kebab-case name with a sentence; `advice`
// is one line with a number the operator can act on. Its JSON form is
// schema::sweep_analysis_json. Pure function: no I/O, no threads,
// deterministic, thread-safe.
#pragma once

#include <cstddef>
#include <limits>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "analysis/conductance.hpp"
#include "analysis/field_axis.hpp"
#include "analysis/sweep_fit.hpp"
#include "analysis/sweep_hints.hpp"

namespace lphi::sweep {

inline constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// The field offset (or its error, or the lag's opposite-sign shift) above
// this fraction of B_phi is a sizeable part of the cusp: flagged here, and the
// threshold of the field-offset alert.
inline constexpr double kOffsetAlertFraction = 0.2;

// A leg is shifted by its centre only when the centre differs from zero by
// more than this many of its standard errors (the centre is still reported).
inline constexpr double kSignificantOffset = 2.0;

// One reading as the instruments give it.
struct Reading {
  double t_s = kNaN;             // NaN when unknown
  double field_t = 0.0;          // the field reading
  double rsq_ohm = 0.0;          // sheet resistance
  double time_constant_s = 0.0;  // the lock-in's, 0 when unknown
};

struct Options {
  fit::SweepFitOptions fit;
  double temperature_k = kNaN;   // carried into the result, not used by the fit
  field_axis::CoverageOptions coverage;
  bool reject_spikes = true;
  double spike_threshold = 6.0;  // robust standard deviations
  // One-sided sweeps (from 0 to +B) prepared from their side and fitted with
  // the odd-in-B term (fit::SweepFitOptions::fit_odd_term), marked
  // "one-sided". Off by default: `lphi fit` still refuses a sweep that does
  // not cross zero field; the live pipeline may turn it on.
  bool allow_one_sided = false;
  // chi2_red against the sweep's noise above this keeps the sweep out of
  // L_phi(T); between 1 and this the length's error is scaled by
  // error_scale. 10 lets a slightly distorted sweep count with a threefold
  // error (lphi's choice).
  double max_chi2_red = 10.0;
};

struct Reason {
  std::string name;      // stable kebab-case: "hole-across-zero", "fit-chi2", ...
  std::string sentence;  // with the numbers
};

struct LegAxis {
  field_axis::Centre centre;
  std::size_t n_readings = 0;
  std::size_t n_spikes = 0;      // readings dropped as spikes
  // The offset its fields were shifted by for the fit: its centre when that
  // is significant (kSignificantOffset) and the centred sweep fits the model
  // better than the sweep about the reading's zero; else 0.
  double shift_t = 0.0;
};

struct Analysis {
  bool ok = false;       // false: bad input (error says what); nothing else is set
  std::string error;
  double temperature_k = kNaN;

  // The field axis.
  std::vector<LegAxis> legs;             // in the order given
  double field_offset_t = 0.0;           // the common offset applied (0 when unknown)
  double field_offset_err_t = kNaN;
  bool offset_known = false;             // at least one leg could be centred
  double remanent_field_t = kNaN;        // -offset (field_axis.hpp's convention)
  double field_lag_s = kNaN, field_lag_err_s = kNaN;   // both legs present, rate known
  double lag_shift_t = kNaN;             // (c_up - c_down) / 2
  double sweep_rate_t_per_s = kNaN;      // near zero field
  double time_constant_s = kNaN;         // the lock-in's (NaN when unknown)
  double max_sweep_rate_t_per_s = kNaN;  // 0.1 B_phi / tau
  bool too_fast = false;
  bool offset_large = false;             // |offset|, its error or the lag shift > 0.2 B_phi
  std::size_t n_spikes = 0;

  // Coverage: the first failed check, or ok.
  field_axis::Coverage coverage;

  // The fit.
  bool fitted = false;                   // prepared and fitted (fit.ok may still be false)
  bool flat = false;                     // no weak-localization signal above the noise
  conductance::PreparedSweep prepared;
  fit::SweepFitResult fit;
  double point_noise_s = kNaN;
  std::optional<double> chi2_red;        // against the sweep's own noise
  double chi2_red_quantum = kNaN;        // fit_sweep's, in (e^2/(pi h))^2
  double error_scale = 1.0;              // sqrt(max(1, chi2_red))
  double runs_p = 1.0;                   // runs test on the residuals' signs (fit::judge_quality)
  std::vector<fit::ModelHint> hints;     // fit::model_hints: another model or geometry would suit
  // The field at which the fitted model leaves its low-field regime: B_phi
  // for a film, max(B_phi, B_so) with spin-orbit, sqrt(3) hbar/(e w L_phi)
  // for a wire. Coverage, the offset and the sweep rate are judged against it.
  double characteristic_field_t = kNaN;
  // sigma(0) and R_sq(0) with the fitted offset (prepared estimate + offset).
  double sigma0_s = kNaN, sigma0_err_s = kNaN;
  double rsq0_ohm = kNaN, rsq0_err_ohm = kNaN;

  // Units.
  bool units_suspect = false;
  std::string unit_hint;

  // The judgement.
  bool usable = false;                   // may enter L_phi(T)
  std::vector<Reason> reasons;
  std::string advice;                    // one line, empty when there is nothing to do
  bool has(std::string_view reason) const;
};

// legs: one or two traverses, each in time order.
Analysis analyze(std::span<const std::vector<Reading>> legs, const Options& options);

// A table of readings in time order split into legs where the field reverses
// (ignoring reversals smaller than 3 median steps, which are noise on the
// reading). At most the legs found; the caller decides how many to use.
std::vector<std::vector<Reading>> split_at_reversals(std::span<const Reading> readings);

}  // namespace lphi::sweep
