// SamplePipeline: the live analysis of one sample, from readings to verdict.
//
// It takes the sample's three streams -- lock-in (X, Y), thermometer (T),
// magnet (B) -- and runs, in event time:
//   Aligner -> SweepSegmenter -> for each completed sweep:
//     lock-in X -> R = X/(gain I) -> R_sq = R/N (conductance.hpp)
//     -> sweep::analyze (centre, coverage, prepare, fit, judge: sweep_analysis.hpp)
//     -> lock-in and heating checks (live_checks.hpp)
//   -> after each new fit: L_phi(T) over the usable fits (fit_dephasing),
//      sigma(0) per temperature plateau, verdict::assess, regime.
// and emits plain records (SweepRecord, FitRecord, VerdictRecord,
// ZeroFieldRecord) for the caller to store and publish.
//
// Which fits enter L_phi(T): those sweep::analyze finds usable (fitted,
// converged, none of window-too-narrow, too-few-points, parameter-at-limit,
// the cusp resolved, chi2_red and the residuals within their limits), whose temperature drift moves L_phi by less than its
// error and that agree with the other sweeps of their plateau
// (fit_admission.hpp: the temperature a fit is reported at, the drift, the
// plateau comparison, and the errors scaled by sqrt(chi2_red) that L_phi(T)
// weighs them with). A fit's chi2_red is its residual variance over the
// variance of the points' noise, estimated from the sweep itself without a
// model (conductance::point_noise_s): dimensionless, about 1 for a good fit,
// and what the fit-chi2 alert judges (fit_sweep's own, in (e^2/(pi h))^2, is
// kept as chi2_red_quantum); it does not keep a fit out of L_phi(T). A sweep's sigma(0) is the robust estimate from
// its innermost points plus the fitted offset (the model's own zero-field
// value; the innermost points alone are biased when B_phi is below their
// field span). sigma(0) per plateau: the mean of those over the plateau's
// stable, prepared sweeps (their mean temperature), its error the larger of
// the mean point error / sqrt(n) and the scatter / sqrt(n).
//
// combine_up_down (default false): an up sweep and the down sweep that
// follows it on the same temperature plateau (or down then up) are fitted
// together as one data set (prepare_sweep averages readings at one field and
// symmetrizes both), which halves the noise on L_phi at the cost of half as
// many points in L_phi(T). The fit belongs to the later sweep of the pair
// (FitRecord::combined_with names the earlier); a sweep that finds no
// partner is fitted alone when the next sweep is not its partner, or at
// finish(). A sweep that waits for its partner is not "in hand": it waits
// for readings, not for work.
//
// Restart. The constructor takes the fits already stored (by sweep index):
// a sweep whose index has a stored fit ending at the same time (t_s equal to
// the sweep's t_end_s) is not fitted again; its stored result is used as it
// is. A stored fit that does not match (the settings changed) is ignored and
// the sweep fitted afresh. Since the segmentation is a function of the
// readings alone, re-reading the same readings from the start gives the same
// sweep indices, and the verdict after the last stored fit equals the one
// computed before the restart. Verdicts are not recomputed for stored fits
// except after the last of them (the one the caller needs); the per-update
// history is already stored.
//
// Cooldowns. A sample is measured over weeks and may be warmed up and cooled
// again (to fix the filtering of the lines, say); thermal cycling can change
// its disorder, so each cooldown is analysed on its own. A warm-up is a
// thermometer readings above new_cooldown_above_k for at least warmup_min_s
// (60 s; a single wild reading is not a thermal cycle) after the sample was
// below half of it (the hysteresis keeps a temperature hovering around the
// threshold from counting again and again); it dates from its first reading
// above the threshold. The first sweep belongs to
// cooldown 1; a sweep that starts after a warm-up that came after the
// previous sweep's start belongs to the next cooldown. L_phi(T), the
// sigma(0) thermometer, the regime and the verdict use the fits of the
// triggering fit's cooldown only. The cooldown is, like the temperature
// run, recomputed from the readings on every start, never stored as input.
//
// Bounded: at most max_queued_sweeps completed sweeps wait for their fit;
// the caller must stop pushing readings while full() (push() then refuses
// nothing, but the queue would grow: the caller's discipline, checked by
// tests). The aligner and segmenter bound their own buffers.
//
// Deterministic: no wall time, no threads, no I/O. Its output depends only on
// the three streams (within the Aligner's interleaving bounds) and the stored
// fits, not on how the readings were chunked or interleaved. Not safe for
// concurrent use.
#pragma once

#include <cstddef>
#include <cstdint>
#include <deque>
#include <map>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <vector>

#include "analysis/alignment.hpp"
#include "analysis/dephasing.hpp"
#include "analysis/field_axis.hpp"
#include "analysis/live_checks.hpp"
#include "analysis/segmenter.hpp"
#include "analysis/sweep_fit.hpp"
#include "analysis/thermometry.hpp"

namespace lphi::live {

struct SampleSettings {
  std::string name;
  mc::Model model = mc::Model::hln2d;
  fit::SampleGeometry geometry;        // squares, width, thickness, mean free path
  double excitation_a = 0.0;           // rms current through the sample
  double gain = 1.0;                   // preamplifier voltage gain
  std::optional<double> diffusion_m2s;
  std::optional<double> alpha_fixed;
  std::optional<double> probe_length_m;  // length between the voltage probes
  std::optional<double> fit_window_t;    // override of the automatic window
  bool fit_background = false;
  bool combine_up_down = false;
  align::AlignerOptions aligner;
  segment::SegmenterOptions segmenter;
  checks::HeatingOptions heating;
  checks::LockinOptions lockin;
  std::size_t max_queued_sweeps = 4;
  // A thermometer reading above this, after one below half of it, starts a
  // new cooldown for the sweeps that follow (see Cooldowns above).
  double new_cooldown_above_k = 30.0;
};

// Empty when usable, else what is wrong (naming the setting).
std::string validate(const SampleSettings& settings);

// dimension for dephasing and verdict: 1 (wire1d), 3 (kawabata3d), else 2.
int model_dimension(mc::Model model);

struct SweepRecord {
  std::int64_t index = 0;
  segment::Direction direction = segment::Direction::up;
  double t_start_s = 0.0, t_end_s = 0.0;
  double field_min_t = 0.0, field_max_t = 0.0;
  std::size_t n_points = 0;
  segment::TemperatureStats temperature;
  std::int64_t temperature_run = 0;
  std::int64_t cooldown = 1;           // 1, 2, ...: see Cooldowns above
  bool temperature_unstable = false;
  bool truncated = false;
  std::size_t n_overload = 0;          // the instrument's flag, or |X|,|Y| >= range
  double max_quadrature_ratio = 0.0;   // max |Y/X|
  double sample_voltage_v = 0.0;       // mean |X| / gain
  std::optional<double> excitation_ratio;  // e V / (k_B T) at the sweep's mean T
  bool operator==(const SweepRecord&) const = default;
};

struct FitRecord {
  std::int64_t sweep_index = 0;
  std::optional<std::int64_t> combined_with;  // the earlier sweep of a combined pair
  bool ok = false;
  std::string error;                 // why it failed: preparation or fit
  std::string model;
  double lphi_m = 0.0, lphi_err_m = 0.0;
  double chi2_red = 0.0;
  bool converged = false;
  std::vector<std::string> flags;
  double temperature_k = 0.0, temperature_spread_k = 0.0;
  std::int64_t temperature_run = 0;
  std::int64_t cooldown = 1;         // the (later) sweep's
  bool temperature_unstable = false;
  std::optional<double> sigma0_s, sigma0_err_s;  // when the sweep could be prepared
  bool used_in_dephasing = false;
  std::vector<std::string> quality;  // checks::fit_quality reasons, plus temperature-unstable
  nlohmann::json result;             // sweep_fit_json (the keys of `lphi fit --json`)
  double t_s = 0.0;                  // end of the (later) sweep
  bool from_store = false;           // loaded, not computed (not compared)
  // The centre of each leg the sweep analysis found (fresh fits only; not
  // stored, not compared): the remanence and lag split uses them.
  std::vector<field_axis::Centre> leg_centres;
  bool operator==(const FitRecord& o) const;
};

struct ZeroFieldRecord {
  std::int64_t temperature_run = 0;
  std::int64_t cooldown = 1;
  double temperature_k = 0.0;
  double sigma_s = 0.0, sigma_err_s = 0.0;
  std::size_t n_sweeps = 0;
  double t_s = 0.0;
  bool operator==(const ZeroFieldRecord&) const = default;
};

struct VerdictRecord {
  std::int64_t sweep_index = 0;      // the sweep whose fit triggered the update
  std::int64_t cooldown = 1;         // whose fits it judged
  double t_s = 0.0;
  std::string state;                 // dephasing::state_name
  std::optional<bool> electrons_cooling;
  std::optional<std::string> likely_cause;
  std::optional<double> exponent_p, lphi_sat_m, t_sat_k;
  std::size_t n_points = 0;          // fits used in L_phi(T)
  std::optional<std::string> regime;
  std::optional<double> aak_ratio;
  nlohmann::json json;               // the {"type":"verdict"} reply element (without "sample")
  bool operator==(const VerdictRecord&) const = default;
};

struct PipelineOutput {
  std::vector<SweepRecord> sweeps;       // in index order, as they are fitted
  std::vector<FitRecord> fits;
  std::vector<ZeroFieldRecord> zero_field;  // plateaus whose sigma(0) changed
  std::vector<VerdictRecord> verdicts;
  void clear();
};

// The reply of {"type":"verdict"} for a sample without any fit.
nlohmann::json no_data_verdict_json();

class SamplePipeline {
 public:
  // settings must pass validate(); otherwise error() is set and nothing is
  // ever emitted. stored: fits already in the database, by sweep index.
  explicit SamplePipeline(SampleSettings settings, std::map<std::int64_t, FitRecord> stored = {});

  void push(const align::LockinReading& r);
  void push(const align::TemperatureReading& r);
  void push(const align::FieldReading& r);

  // At most max_queued_sweeps completed sweeps are waiting: stop pushing.
  bool full() const { return queue_.size() >= settings_.max_queued_sweeps; }
  // Completed sweeps wait to be fitted.
  bool has_work() const { return !queue_.empty(); }
  // Fits up to max_sweeps queued sweeps, appending the records to out.
  void process(PipelineOutput& out, std::size_t max_sweeps = SIZE_MAX);
  // End of a recording: decides every held reading, closes the open run,
  // fits everything (and a sweep waiting for its partner).
  void finish(PipelineOutput& out);

  const std::string& error() const { return error_; }
  std::size_t sweeps_seen() const { return sweeps_seen_; }
  std::size_t fits_done() const { return fits_.size(); }
  std::size_t fits_reused() const { return fits_reused_; }
  // Their counts and diagnostics (what was dropped, by reason, for status).
  const align::Aligner& aligner() const { return aligner_; }
  const segment::SweepSegmenter& segmenter() const { return segmenter_; }

 private:
  void take(std::vector<align::AlignedPoint>& points);
  void note_temperature(const align::TemperatureReading& r);
  void enqueue(segment::Sweep&& sweep);
  std::int64_t cooldown_of(const segment::Sweep& sweep) const;
  SweepRecord describe(const segment::Sweep& sweep) const;
  FitRecord fit_points(const std::vector<const segment::Sweep*>& sweeps, const SweepRecord& last);
  void fit_and_record(std::vector<const segment::Sweep*> sweeps, PipelineOutput& out);
  void handle(segment::Sweep&& sweep, PipelineOutput& out);
  void update_zero_field(const FitRecord& fit, PipelineOutput& out);
  void split_field_axis(FitRecord& rec, const segment::Sweep& leg);
  VerdictRecord assess(const FitRecord& trigger) const;

  SampleSettings settings_;
  std::string error_;
  align::Aligner aligner_;
  segment::SweepSegmenter segmenter_;
  std::map<std::int64_t, FitRecord> stored_;
  std::deque<segment::Sweep> queue_;
  std::optional<segment::Sweep> waiting_;  // combine_up_down: for its partner
  std::vector<align::AlignedPoint> scratch_;
  segment::SegmentOutput segmented_;
  std::vector<FitRecord> fits_;
  struct PlateauSigma {
    std::vector<double> sigma_s, sigma_err_s, temperature_k;
    double t_s = 0.0;
    std::int64_t cooldown = 1;
  };
  std::map<std::int64_t, PlateauSigma> zero_field_;
  // Cooldowns: warm-ups not yet passed by a sweep's start (event times,
  // bounded by max_warmups), whether the sample has been below half the
  // threshold since the last one, and each queued sweep's cooldown.
  static constexpr std::size_t max_warmups = 256;
  static constexpr double warmup_min_s = 60.0;
  std::deque<double> warmups_;
  bool cooled_ = false;
  std::optional<double> above_since_s_;  // first reading of the current run above the threshold
  std::int64_t cooldown_ = 0;
  double last_sweep_start_s_ = 0.0;
  std::map<std::size_t, std::int64_t> sweep_cooldown_;
  std::size_t sweeps_seen_ = 0;
  std::size_t fits_reused_ = 0;
  // The exponent p of the latest L_phi(T) fit per cooldown: the drift's
  // effect on L_phi is judged with it (fit_admission.hpp).
  std::map<std::int64_t, double> fitted_p_;
  // The last single leg fitted on each temperature run: its direction and
  // centre, for the remanence and lag split of the next leg.
  struct LegCentre {
    segment::Direction direction = segment::Direction::up;
    field_axis::Centre centre;
    std::int64_t sweep_index = 0;
  };
  std::map<std::int64_t, LegCentre> last_leg_;
};

}  // namespace lphi::live
