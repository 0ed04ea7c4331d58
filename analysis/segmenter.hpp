// Segmenting one sample's aligned points into temperature plateaus and field
// sweeps, in event time.
//
// PlateauDetector: a temperature plateau is a maximal run of consecutive
// points whose temperatures stay within a relative spread,
//   (T_max - T_min) <= relative_spread * T_mean      (over the run),
// lasting at least min_duration_s (t_last - t_first). Runs are grown
// greedily: the first point that would break the criterion ends the run and
// starts the next one. Every run gets an index (0, 1, 2, ... in time order);
// a run that lasts long enough is reported as a Plateau with its temperature
// statistics when it ends. Runs are what a "temperature change" means below:
// a sweep whose points do not all lie in one run straddles a change. Because
// the criterion is the full range max - min, set relative_spread to several
// times the thermometer's relative noise (the range of N Gaussian readings
// grows like 2 sqrt(2 ln N) standard deviations: about 8 for N = 1e4).
//
// SweepSegmenter: a field sweep is a run of points in which B moves in one
// direction, monotonic within the reversal tolerance (B may fall back by up
// to that much, noise, without ending an up run). The run ends at a
// reversal (B more than the tolerance behind the run's extreme); the points
// after the extreme start the next run, in the other direction. A closed run
// is trimmed to its traverse: from the last point within the tolerance of
// its starting extreme to the first point within the tolerance of its final
// one, so that a magnet dwelling at either end does not stretch the sweep
// over the dwell (the dropped points are counted in dwell_points; a ramp
// also loses its readings within the tolerance of each end, at most one
// tolerance of field, which a fit does not miss).
//
// Which traverse is a sweep. It must pass through zero field (its lowest
// field at most +tolerance and its highest at least -tolerance, over the
// whole run, dwells included, and from the field at the reversal that began
// it: the points settling after a turn at zero are dropped) and reach
// half the span, span/2, on at least one side of zero. Reaching it on both
// sides makes a two-sided sweep (Sides::two_sided, the symmetric sweep that
// prepare_sweep symmetrizes); on one side only, a one-sided sweep
// (Sides::positive or Sides::negative: a unipolar magnet, a sweep from 0 to
// +B, or one that starts too close to zero on the other side to be
// mirrored). It must also hold at least min_points points, and at least
// fast_return_density times the points per tesla of the last sweep emitted:
// a magnet that sweeps only up and returns fast makes a return run that
// covers the field but holds a few points (counted as fast_returns, not
// emitted). Every other closed run is counted by reason (RejectedRuns).
//
// One-sided legs. A magnet that sweeps both ways goes from zero to -B_max
// before its first sweep and back to zero after its last: one-sided
// traverses that are the approach to and the return from a two-sided
// sweep, not sweeps of their own (a second, half copy of the same data).
// So a one-sided traverse right after a two-sided one (the return), and one
// right before a two-sided one (the approach), are counted as approach_legs
// and not emitted; one-sided traverses between one-sided ones (a unipolar
// or one-way magnet) are. A one-sided traverse therefore waits until the
// next traverse qualifies (or finish()) before it is emitted.
//
// Span and tolerance from the data. Unless set, both follow the readings, so
// that sweeps from +-2 mT to +-1 T are found with field readings at any
// rate (rules, each a function of the points in order: deterministic):
//   tolerance = clamp(tolerance_noise_factor * sigma_B, tolerance_floor_t,
//                     tolerance_cap_t)
// with sigma_B the larger of the field readings' own noise as the Aligner
// estimates it (AlignedPoint::field_noise_t) and the same chord-residual
// estimate over the points' fields (align::FieldEstimates), as of the point
// being segmented. A factor 20: the range of N Gaussian readings is about
// 2 sqrt(2 ln N) sigma, 8.6 sigma for N = 1e4, and a magnet's field noise is
// not white (a power supply's drift and ripple are correlated over
// readings, which the chord residuals see only in part: lphi-sim's magnet,
// with 2 uT of noise, gives sigma_B = 1.5 uT and falls of 16 uT within
// its +-2 mT sweeps). The floor (1 uT) is far below the +-2 mT sweeps a
// dilution fridge sees at its lowest temperatures, the cap (2 mT) far below
// the +-1 T sweeps where such a noisy field occurs.
//   span/2 = max(span_fraction * E, span_floor_tolerances * tolerance)
// with E the largest |B| reached by the last span_recent_runs closed runs
// (the one being judged included). A sweep then reaches at least a tenth of
// the field the magnet has recently been taken to, so that a magnet parked
// near zero, whose noise may form runs through zero, or a field step, does
// not make sweeps, while sweeps of any size are found; the floor, five
// tolerances (a hundred noise sigma), keeps runs of noise out when the magnet
// has not moved at all. An explicit min_span_t or reversal_tolerance_t
// replaces its rule (the span and tolerance in force are in diagnostics()).
//
// Temperature drift. Each sweep carries the least-squares straight line of
// T against t over its points: temperature_drift_k = slope * (t_end -
// t_start), the change the line makes over the sweep, and
// temperature_residual_k, the standard deviation of T about the line
// (n - 2 degrees of freedom). A smooth drift is judged downstream by its
// effect on L_phi; temperature_unstable below means only that the sweep
// straddles a change between temperature runs.
//
// Temperature. A sweep whose points do not all lie in one temperature run
// (a plateau boundary, or a spread above the criterion) and whose own
// temperatures do not meet the plateau criterion either,
//   (T_max - T_min) > relative_spread * T_mean   (over the sweep's points),
// is marked temperature_unstable: it is emitted, so that it can be seen and
// alerted on, but must be kept out of L_phi(T). The second condition is for
// the greedy runs: a run that began on the slow tail of a cooling ramp
// breaks when the spread from its first, warmer points is exceeded, which
// can be in the middle of a sweep taken on the settled plateau. Such a
// sweep is stable and belongs to the run of its last point (every sweep
// does: the run that goes on).
//
// Settling. A lock-in output lags its input by several time constants tau;
// points within settle = settling_time_constants * tau (tau of the point that
// triggered; settling_unknown_tau_s when the lock-in does not report tau)
// after one of these are excluded from sweeps and counted by reason:
//   - a temperature change: a point that starts a new temperature run;
//   - a field step: |B_i - B_(i-1)| > field_step_t between consecutive
//     points (0 disables; for magnets stepped rather than ramped);
//   - a field reversal: after the extreme of a run (points of the new run
//     already taken in are removed, later ones excluded);
//   - a change of the lock-in's input range or time constant.
// Excluded points still feed the plateau detector (temperature does not
// settle with the lock-in).
//
// Bounded memory. The open run holds at most max_points points. A run that
// reaches the limit is closed there: emitted with truncated = true when it
// covers the span, else counted in truncated_discarded; segmentation then
// starts afresh (direction unknown) with the next point. Choose max_points
// above the number of points a real sweep has (20 Hz for a 30 min sweep is
// 36000). A one-sided sweep waiting for the next traverse (One-sided legs)
// holds at most max_points more. The PlateauDetector holds O(1) state.
//
// Cost and determinism. Every point is appended once and moved at most once
// more (the tail after an extreme); a closed sweep is scanned once: amortized
// O(1) per point. The output depends only on the sequence of points, never
// on how it was split into calls (chunking invariance).
//
// Input: points with non-finite time, field or temperature, a temperature
// <= 0, or a time earlier than the previous point's are refused and counted.
//
// No I/O, no threads, deterministic. Plain values, not safe for concurrent
// use.
#pragma once

#include <cstddef>
#include <deque>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "analysis/alignment.hpp"

namespace lphi::segment {

// Temperature statistics over points (std is the sample standard deviation,
// 0 for a single point).
struct TemperatureStats {
  std::size_t n = 0;
  double mean_k = 0.0;
  double std_k = 0.0;
  double min_k = 0.0;
  double max_k = 0.0;
  bool operator==(const TemperatureStats&) const = default;
};

// Welford's running mean and variance (B. P. Welford, Technometrics 4, 419
// (1962)): one pass, numerically stable.
class TemperatureAccumulator {
 public:
  void add(double temperature_k);
  TemperatureStats stats() const;
  std::size_t n() const { return n_; }
  double mean_k() const { return mean_; }
  double min_k() const { return min_; }
  double max_k() const { return max_; }

 private:
  std::size_t n_ = 0;
  double mean_ = 0.0, m2_ = 0.0, min_ = 0.0, max_ = 0.0;
};

struct PlateauOptions {
  double relative_spread = 0.02;  // (T_max - T_min) / T_mean within a run
  double min_duration_s = 300.0;  // a run at least this long is a plateau
};

struct Plateau {
  std::size_t run = 0;  // index of the temperature run it is
  double t_start_s = 0.0, t_end_s = 0.0;
  TemperatureStats temperature;
  bool operator==(const Plateau&) const = default;
};

class PlateauDetector {
 public:
  explicit PlateauDetector(const PlateauOptions& options = {});

  // Feeds one reading (finite, T > 0, time non-decreasing: the caller
  // checks). Appends to `out` the plateau that this reading ends, if the run
  // it ends qualifies. Returns true when the reading starts a new run after
  // an earlier one (a temperature change), false otherwise.
  bool push(double t_s, double temperature_k, std::vector<Plateau>& out);
  // Ends the current run (end of a recording).
  void finish(std::vector<Plateau>& out);

  std::size_t run() const { return run_; }  // index of the current run
  bool started() const { return acc_.n() > 0; }

 private:
  void close(std::vector<Plateau>& out);
  PlateauOptions options_;
  TemperatureAccumulator acc_;
  double t_start_s_ = 0.0, t_last_s_ = 0.0;
  std::size_t run_ = 0;
};

enum class Direction { up, down };
std::string_view direction_name(Direction d);  // "up", "down"

// Which sides of zero field a sweep covers to span/2.
enum class Sides { two_sided, positive, negative };
std::string_view sides_name(Sides s);  // "two-sided", "positive", "negative"

struct Sweep {
  std::size_t index = 0;             // 0, 1, 2, ... in the order emitted
  Direction direction = Direction::up;
  double t_start_s = 0.0, t_end_s = 0.0;
  double field_min_t = 0.0, field_max_t = 0.0;
  Sides sides = Sides::two_sided;    // which sides of zero reach span/2
  std::vector<align::AlignedPoint> points;  // in time order
  TemperatureStats temperature;
  double temperature_drift_k = 0.0;     // least-squares slope of T(t) times the duration
  double temperature_residual_k = 0.0;  // scatter of T about that line
  std::size_t temperature_run = 0;   // run of its last point (see Temperature above)
  bool temperature_unstable = false; // straddles a temperature change
  bool truncated = false;            // closed at max_points
  std::size_t n_overload = 0;        // points the lock-in flagged as overloaded
  bool operator==(const Sweep&) const = default;
};

struct SegmenterOptions {
  PlateauOptions plateau;
  // Unset: automatic (see Span and tolerance from the data).
  std::optional<double> min_span_t;            // a sweep reaches span/2 on one side at least
  std::optional<double> reversal_tolerance_t;  // field noise that does not end a run
  double span_fraction = 0.1;          // automatic span/2: this times the largest recent |B|
  std::size_t span_recent_runs = 16;   // ... over this many closed runs
  double span_floor_tolerances = 5.0;  // ... and at least this many tolerances
  double tolerance_noise_factor = 20.0;  // automatic tolerance: this times sigma_B
  double tolerance_floor_t = 1e-6;
  double tolerance_cap_t = 2e-3;
  std::size_t min_points = 20;         // a sweep holds at least this many points
  double fast_return_density = 0.2;    // ... and this fraction of the last sweep's points per tesla
  double field_step_t = 0.0;           // step between consecutive points; 0 off
  double settling_time_constants = 5.0;  // 5 tau: a 6 dB/oct filter within 1%
  double settling_unknown_tau_s = 1.0;   // settle when tau is not reported
  std::size_t max_points = 200000;
};

// Empty when usable, else what is wrong.
std::string validate(const SegmenterOptions& options);

struct SettlingCounts {
  std::size_t temperature_change = 0;
  std::size_t field_step = 0;
  std::size_t field_reversal = 0;
  std::size_t range_or_time_constant = 0;
  std::size_t total() const {
    return temperature_change + field_step + field_reversal + range_or_time_constant;
  }
  bool operator==(const SettlingCounts&) const = default;
};

// Closed runs that were not sweeps, by the first test they failed
// (truncated ones included).
struct RejectedRuns {
  std::size_t no_direction = 0;   // the field never moved by more than the tolerance
  std::size_t off_zero = 0;       // did not pass through zero field
  std::size_t below_span = 0;     // passed through zero, reached span/2 on neither side
  std::size_t few_points = 0;     // fewer than min_points points
  std::size_t fast_returns = 0;   // below fast_return_density of the last sweep's points per tesla
  std::size_t approach_legs = 0;  // one-sided, beside a two-sided sweep (see One-sided legs)
  std::size_t total() const {
    return no_direction + off_zero + below_span + few_points + fast_returns + approach_legs;
  }
  bool operator==(const RejectedRuns&) const = default;
};

struct SegmentCounts {
  std::size_t points_received = 0;
  std::size_t refused = 0;             // non-finite, T <= 0, or out of order
  SettlingCounts settling;             // excluded, by reason
  std::size_t dwell_points = 0;        // trimmed from the ends of runs
  std::size_t runs_short = 0;          // closed runs that were not sweeps (not truncated)
  std::size_t truncated_discarded = 0; // runs closed at max_points that were not sweeps
  RejectedRuns rejected;               // both of the above, by reason
  std::size_t sweeps = 0;
  std::size_t sweeps_temperature_unstable = 0;
  std::size_t sweeps_truncated = 0;
  std::size_t plateaus = 0;
  bool operator==(const SegmentCounts&) const = default;
};

// What the segmenter has seen (for the reason a sample has no sweeps).
struct SegmentDiagnostics {
  double tolerance_t = 0.0;         // the reversal tolerance in force
  double half_span_t = 0.0;         // span/2 in force at the last closed run
  double field_min_t = 0.0, field_max_t = 0.0;  // over every point taken (0, 0 before)
  double largest_reach_t = 0.0;     // largest |B| of a closed run through zero
  double field_noise_t = 0.0;       // sigma_B behind the automatic tolerance
  bool operator==(const SegmentDiagnostics&) const = default;
};

struct SegmentOutput {
  std::vector<Plateau> plateaus;
  std::vector<Sweep> sweeps;
};

class SweepSegmenter {
 public:
  // Options must pass validate(); otherwise error() is set and every point
  // is refused.
  explicit SweepSegmenter(const SegmenterOptions& options = {});

  // Appends the plateaus and sweeps completed by these points to `out`.
  void push(const align::AlignedPoint& p, SegmentOutput& out);
  void push(std::span<const align::AlignedPoint> points, SegmentOutput& out);
  // Closes the open run and the current temperature run (end of a
  // recording): emits them if they qualify.
  void finish(SegmentOutput& out);

  const SegmentCounts& counts() const { return counts_; }
  const SegmentDiagnostics& diagnostics() const { return diagnostics_; }
  const std::string& error() const { return error_; }
  std::size_t buffered_points() const { return run_.size(); }

 private:
  enum class RunDirection { unknown, up, down };
  enum class SettleReason { temperature_change, field_step, field_reversal, lockin_setting };
  struct Held {
    align::AlignedPoint point;
    std::size_t temperature_run;
  };
  double settle_s(const align::AlignedPoint& p) const;
  void start_settling(double until_s, SettleReason reason);
  void count_settling(SettleReason reason);
  void reverse(const Held& h, SegmentOutput& out);
  void add_to_run(const Held& h, SegmentOutput& out);
  void close_run(std::size_t end, bool truncated, SegmentOutput& out);
  void emit(std::size_t first, std::size_t last, RunDirection dir, bool truncated,
            SegmentOutput& out);
  void track_field(const align::AlignedPoint& p);
  void deliver(Sweep&& sweep, SegmentOutput& out);
  std::optional<Sweep> pending_;      // a one-sided sweep waiting for the next traverse
  std::optional<Sides> last_sides_;   // of the last traverse that qualified
  std::optional<double> run_origin_t_;  // the field at the reversal that began the open run
  double half_span_t(double reach_t);

  SegmentDiagnostics diagnostics_;
  align::FieldEstimates point_noise_;
  double tolerance_t_ = 0.0;
  std::deque<double> recent_reach_t_;  // |B| reached by the last closed runs
  double last_sweep_density_ = 0.0;    // points per tesla of the last sweep emitted
  bool seen_field_ = false;

  SegmenterOptions options_;
  std::string error_;
  SegmentCounts counts_;
  PlateauDetector plateaus_;
  bool have_previous_ = false;
  align::AlignedPoint previous_;
  bool settling_ = false;  // a settling window has been opened
  double settle_until_s_ = 0.0;
  SettleReason settle_reason_ = SettleReason::temperature_change;
  std::vector<Held> run_;
  RunDirection direction_ = RunDirection::unknown;
  std::size_t extreme_ = 0;  // index in run_ of the run's extreme so far
  std::size_t low_ = 0, high_ = 0;  // while the direction is unknown
  std::size_t next_sweep_index_ = 0;
};

}  // namespace lphi::segment
