// Aligning one sample's lock-in readings with its thermometer and magnet.
//
// An Aligner takes three time-ordered streams -- lock-in readings (X, Y),
// thermometer readings (T) and field readings (B) -- in any interleaving of
// arrival, and emits, for each usable lock-in reading, one AlignedPoint with
// the temperature and the field interpolated linearly in time at the lock-in
// reading's time. Everything runs in event time (the readings' own `t_s`),
// never in wall time.
//
// Interpolation. For a lock-in reading at time t and a stream S (thermometer
// or field), let a be the last S reading with t_a <= t and b the first with
// t_b > t. Then
//   value(t) = v_a                                     if t_a == t,
//   value(t) = v_a + (v_b - v_a) (t - t_a) / (t_b - t_a)  otherwise,
// provided t - t_a <= max_age and t_b - t <= max_age (the neighbour on each
// side is recent). There is no extrapolation: a lock-in reading without a
// reading of S within max_age on BOTH sides (or one exactly at its time) is
// not used, and is counted under missing_temperature or missing_field (a
// reading missing both is counted under both, once in `unused`). This keeps
// a point's temperature and field bounded by measured values; a magnet that
// stops reporting during a ramp cannot leave a sweep with invented fields.
//
// When is a lock-in reading decided? Each stream is time-ordered, so once
// stream S has delivered a reading with t_S >= t, the neighbours of t in S
// are final. A lock-in reading is held until both other streams have reached
// its time. So that a silent stream cannot hold readings forever, it is also
// decided (with what has arrived) when
//   - the lock-in stream itself has advanced more than max_hold_s past it
//     (counted in decided_by_hold), or
//   - max_pending readings are already held (counted in decided_by_capacity),
//   - or flush() is called (end of a recording).
// Guarantee: the points emitted and every count except decided_by_hold
// (which records how readings were decided) are a function of the three
// streams alone, independent of how their arrival is interleaved and of
// chunking, as long as no stream's reading arrives after another stream's
// reading that is more than max_hold_s - max_age later in event time (max
// age of the lagging stream), and the buffers stay below their capacities.
// (A reading decided by the hold then already has every neighbour within its
// max age.) Outside those bounds readings are decided early and counted,
// never silently changed.
//
// Field age, automatic. A magnet read once every few seconds would leave
// every lock-in reading without a recent field reading under a fixed age
// limit. Unless max_age_field_s is set, the limit for a lock-in reading at t
// is field_age_intervals times the median interval between the last
// rolling_window field readings up to the first one after t (the reading b
// above; the upper middle interval for an even count), clamped to
// [field_age_floor_s, min(field_age_cap_s, max_hold_s)]. It depends only on
// the field stream, so it keeps the guarantee above; max_age_field_bound_s()
// is the largest limit the options allow (for the callers' lag allowance).
//
// Field noise. Each field reading's deviation from the straight line through
// its two neighbours, r_i = B_i - (B_(i-1) + (B_(i+1) - B_(i-1)) w),
// w = (t_i - t_(i-1)) / (t_(i+1) - t_(i-1)), is a second difference: on a
// linear ramp or a dwell it is noise alone, with variance
// sigma^2 (1 + w^2 + (1 - w)^2) for independent readings of noise sigma. The
// estimate is 1.4826 median|r_i| / sqrt(1 + w^2 + (1 - w)^2) over the last
// rolling_window readings (the median absolute deviation scaled to a
// Gaussian's sigma, common practice; a reversal or a change of ramp rate is
// one outlier that the median ignores). Each AlignedPoint carries the
// estimate as it stood at its field neighbour a (field_noise_t, 0 while fewer
// than 8 residuals are known), a function of the field stream alone, so
// that the segmenter can derive its reversal tolerance from the readings
// rather than from the interpolated points, whose second differences vanish
// between field readings.
//
// Buffers. Thermometer and field readings are kept only while a present or
// future lock-in reading may need them (the last one at or before the oldest
// undecided lock-in time, and everything after). Each buffer holds at most
// max_buffered readings; at the limit its oldest reading is discarded and
// counted (dropped_temperature / dropped_field). Every reading enters and
// leaves each buffer once: amortized O(1) per reading.
//
// Input checks. Times must be finite. The lock-in stream must be
// non-decreasing in time; the thermometer and field streams strictly
// increasing (a repeated time would make "the last reading at or before t"
// depend on arrival order). A reading out of order in its own stream is
// refused and counted as out_of_order. Lock-in X, Y finite; temperature finite and > 0;
// field finite; range and time constant finite and >= 0 (0: unknown).
// Refused readings are counted by stream and reason; nothing throws.
//
// No I/O, no threads, deterministic. An Aligner is a plain value: not safe
// for concurrent use, copyable.
#pragma once

#include <cstddef>
#include <deque>
#include <optional>
#include <string>
#include <vector>

namespace lphi::align {

struct LockinReading {
  double t_s = 0.0;
  double x_v = 0.0;               // in-phase, rms volts at the lock-in input
  double y_v = 0.0;               // quadrature
  double range_v = 0.0;           // input range (sensitivity); 0 unknown
  double time_constant_s = 0.0;   // output filter time constant; 0 unknown
  bool overload = false;          // the instrument's own overload flag
};

struct TemperatureReading {
  double t_s = 0.0;
  double temperature_k = 0.0;
};

struct FieldReading {
  double t_s = 0.0;
  double field_t = 0.0;
};

// One lock-in reading with the temperature and field at its time.
struct AlignedPoint {
  double t_s = 0.0;
  double x_v = 0.0;
  double y_v = 0.0;
  double temperature_k = 0.0;
  double field_t = 0.0;
  double range_v = 0.0;
  double time_constant_s = 0.0;
  bool overload = false;          // as reported by the instrument
  // A thermometer / field reading at exactly t was used, no interpolation:
  bool temperature_exact = false;
  bool field_exact = false;
  double field_noise_t = 0.0;     // the field readings' noise sigma (see Field noise); 0 unknown
  bool operator==(const AlignedPoint&) const = default;
};

struct AlignerOptions {
  double max_age_temperature_s = 30.0;  // a bridge scanning channels is slow
  // Unset: automatic, from the field readings' own interval (Field age).
  std::optional<double> max_age_field_s;
  double field_age_intervals = 5.0;     // automatic: this many median intervals
  double field_age_floor_s = 2.0;       // ... at least (the fixed limit lphi used to have)
  double field_age_cap_s = 30.0;        // ... at most
  double max_hold_s = 60.0;             // event-time lag tolerated between streams
  std::size_t max_pending = 100000;     // lock-in readings held at most
  std::size_t max_buffered = 100000;    // thermometer / field readings kept at most
};

// Empty when the options are usable, else what is wrong (ages finite and
// > 0, floor <= cap, hold finite and at least both ages (the floor when
// automatic), max_pending >= 1, max_buffered >= 2).
std::string validate(const AlignerOptions& options);

// The largest field age the options allow: max_age_field_s when set, else
// min(field_age_cap_s, max_hold_s).
double max_age_field_bound_s(const AlignerOptions& options);

// How many field readings the rolling estimates (interval, noise) look back.
inline constexpr std::size_t rolling_window = 64;

struct AlignmentCounts {
  std::size_t lockin_received = 0;
  std::size_t aligned = 0;               // emitted as AlignedPoint
  std::size_t unused = 0;                // decided, but not usable (below)
  std::size_t missing_temperature = 0;   // no thermometer reading within max age on a side
  std::size_t missing_field = 0;         // no field reading within max age on a side
  std::size_t decided_by_hold = 0;       // decided because the lock-in ran max_hold_s ahead
  std::size_t decided_by_capacity = 0;   // decided because max_pending were held
  std::size_t refused_lockin = 0;        // non-finite or negative values
  std::size_t refused_temperature = 0;
  std::size_t refused_field = 0;
  std::size_t out_of_order_lockin = 0;   // earlier than the previous reading of its stream
  std::size_t out_of_order_temperature = 0;
  std::size_t out_of_order_field = 0;
  std::size_t dropped_temperature = 0;   // discarded at max_buffered
  std::size_t dropped_field = 0;
  bool operator==(const AlignmentCounts&) const = default;
};

// What the field stream looks like so far (for the reason a sample has no
// sweeps): the latest rolling estimates, 0 before enough readings.
struct FieldStreamStats {
  double median_interval_s = 0.0;  // over the last rolling_window intervals
  double age_limit_s = 0.0;        // the limit in force (automatic or set)
  double noise_t = 0.0;            // see Field noise
  bool operator==(const FieldStreamStats&) const = default;
};

// The rolling estimates of a field series (see Field age and Field noise):
// the median interval between readings and the noise sigma from the
// chord residuals, each over the last rolling_window values. O(window) per
// reading. Feed it strictly increasing times. A plain value.
class FieldEstimates {
 public:
  void add(double t_s, double field_t);
  double median_interval_s() const { return interval_; }  // 0 before two readings
  double noise_t() const { return noise_; }               // 0 before 8 residuals

 private:
  static double median(const std::deque<double>& values);
  std::deque<double> intervals_, residuals_;
  double t_[2] = {0.0, 0.0}, b_[2] = {0.0, 0.0};
  std::size_t n_ = 0;
  double interval_ = 0.0, noise_ = 0.0;
};

class Aligner {
 public:
  // Options must pass validate(); otherwise error() is set and every reading
  // is refused (counted), so a misconfigured aligner never emits points.
  explicit Aligner(const AlignerOptions& options = {});

  // Each call appends to `out` the points it completes (possibly none, or
  // several held ones), in lock-in time order.
  void push(const LockinReading& r, std::vector<AlignedPoint>& out);
  void push(const TemperatureReading& r, std::vector<AlignedPoint>& out);
  void push(const FieldReading& r, std::vector<AlignedPoint>& out);

  // Decides every held reading with what has arrived (end of a recording).
  void flush(std::vector<AlignedPoint>& out);

  const AlignmentCounts& counts() const { return counts_; }
  const FieldStreamStats& field_stats() const { return field_stats_; }
  const std::string& error() const { return error_; }
  std::size_t pending() const { return pending_.size(); }
  std::size_t buffered_temperature() const { return temperature_.size(); }
  std::size_t buffered_field() const { return field_.size(); }

 private:
  struct Sample {
    double t_s;
    double value;
    double age_limit_s = 0.0;  // field: the limit for times before this reading
    double noise = 0.0;        // field: the noise estimate as of this reading
  };
  struct Lookup {
    bool ok = false;
    bool exact = false;
    double value = 0.0;
    double noise = 0.0;
  };
  double field_age_limit_s(double median_interval_s) const;
  void release(std::vector<AlignedPoint>& out);
  void decide_front(std::vector<AlignedPoint>& out);
  static void trim(std::deque<Sample>& buffer, double frontier_t_s);
  // max_age_s < 0: the limit stored with the reading after t_s.
  static Lookup interpolate(std::deque<Sample>& buffer, double t_s, double max_age_s);
  void keep(std::deque<Sample>& buffer, Sample s, std::size_t& dropped);

  AlignerOptions options_;
  std::string error_;
  AlignmentCounts counts_;
  FieldStreamStats field_stats_;
  FieldEstimates field_estimates_;
  std::deque<LockinReading> pending_;
  std::deque<Sample> temperature_;
  std::deque<Sample> field_;
  double last_lockin_t_ = 0.0;
  double last_temperature_t_ = 0.0;
  double last_field_t_ = 0.0;
  bool seen_lockin_ = false;
  bool seen_temperature_ = false;
  bool seen_field_ = false;
};

}  // namespace lphi::align
