#include "drivers/sim/world.hpp"

#include <algorithm>
#include <cmath>

#include "analysis/synthetic.hpp"

namespace lphi::sim {
namespace {

constexpr std::size_t kMaxSegments = 64;
constexpr std::size_t kMaxManualSpans = 1024;
// Nodes of the lock-in's output filter (see World::lockin).
constexpr int kFilterNodes = 48;

// The splitmix64 finalizer, used to turn (seed, channel, index) into one
// well-mixed 64-bit seed for a NormalSource.
std::uint64_t mix64(std::uint64_t z) {
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
  return z ^ (z >> 31);
}

}  // namespace

const char* instrument_name(Instrument i) {
  switch (i) {
    case Instrument::lockin: return "lockin";
    case Instrument::thermometer: return "thermometer";
    case Instrument::magnet: return "magnet";
  }
  return "?";
}

// --- Magnet -----------------------------------------------------------------

const Magnet::Segment* Magnet::segment_at(double t_s) const {
  const Segment* found = nullptr;
  for (const Segment& s : segments_) {
    if (s.start_s <= t_s) found = &s;
  }
  return found;
}

double Magnet::field_t(double t_s) const {
  const Segment* s = segment_at(t_s);
  if (s == nullptr || !s->manual) return schedule_->field_t(t_s);
  const double distance = std::abs(s->target_t - s->from_t);
  const double moved = std::min(distance, s->rate_t_per_s * (t_s - s->start_s));
  return s->from_t + std::copysign(moved, s->target_t - s->from_t);
}

double Magnet::target_t(double t_s) const {
  const Segment* s = segment_at(t_s);
  return s == nullptr || !s->manual ? schedule_->field_target_t(t_s) : s->target_t;
}

double Magnet::rate_t_per_s(double t_s) const {
  const Segment* s = segment_at(t_s);
  return s == nullptr || !s->manual ? schedule_->field_rate_t_per_s(t_s) : s->rate_t_per_s;
}

void Magnet::set_target(double t_now_s, double target, double rate) {
  const double from = field_t(t_now_s);
  if (!manual()) {
    if (manual_spans_.size() == kMaxManualSpans) manual_spans_.erase(manual_spans_.begin());
    manual_spans_.emplace_back(t_now_s, INFINITY);
  }
  if (segments_.size() == kMaxSegments) segments_.erase(segments_.begin());
  segments_.push_back({t_now_s, true, from, target, rate});
}

void Magnet::resume_programme(double t_now_s) {
  if (!manual()) return;
  manual_spans_.back().second = t_now_s;
  if (segments_.size() == kMaxSegments) segments_.erase(segments_.begin());
  segments_.push_back({t_now_s, false, 0.0, 0.0, 0.0});
}

bool Magnet::manual_during(double t0_s, double t1_s) const {
  return std::any_of(manual_spans_.begin(), manual_spans_.end(),
                     [&](const auto& span) { return span.first <= t1_s && span.second >= t0_s; });
}

// --- World ------------------------------------------------------------------

World::World(Scenario s)
    : scenario_(std::move(s)), schedule_(scenario_.programme), magnet_(schedule_) {}

double World::bath_temperature_k(double t_s) const {
  double t = schedule_.temperature_k(t_s);
  if (const double rel = scenario_.faults.plateau_drift_relative; rel != 0.0) {
    // The drift: linear in time across the plateau's sweeps,
    // held to the plateau's end, fading over the next plateau's ramp.
    const auto& plateaus = schedule_.plateaus();
    for (std::size_t i = 0; i < plateaus.size(); ++i) {
      const PlannedPlateau& p = plateaus[i];
      const double span = p.sweeps_end_s - p.sweeps_start_s;
      if (span <= 0.0 || t_s < p.sweeps_start_s) continue;
      const double full = rel * p.temperature_k;
      if (t_s < p.sweeps_end_s) {
        t += full * (t_s - p.sweeps_start_s) / span;
      } else if (t_s < p.end_s) {
        t += full;
      } else if (i + 1 < plateaus.size() && t_s < plateaus[i + 1].reached_s) {
        const double ramp = plateaus[i + 1].reached_s - p.end_s;
        t += full * (1.0 - (t_s - p.end_s) / ramp);
      } else if (i + 1 == plateaus.size()) {
        t += full;  // the last plateau keeps its drifted temperature
      }
    }
  }
  for (const Faults::Excursion& e : scenario_.faults.excursions) {
    if (!e.contains(t_s)) continue;
    const double s = std::sin(std::acos(-1.0) * (t_s - e.start_s) / e.duration_s);
    t += e.amplitude_k * s * s;
  }
  return t;
}

double World::lockin_range_v(double t_s, double set_range_v) const {
  for (const Faults::Range& r : scenario_.faults.ranges)
    if (r.contains(t_s)) return r.range_v;
  return set_range_v;
}

double World::lockin_time_constant_s(double t_s, double set_time_constant_s) const {
  for (const Faults::TimeConstant& c : scenario_.faults.time_constants)
    if (c.contains_open(t_s)) return c.time_constant_s;
  return set_time_constant_s;
}

bool World::lockin_in_hole(double t_s) const {
  for (const Faults::Hole& h : scenario_.faults.holes) {
    if (!h.contains_open(t_s)) continue;
    const double b = magnet_.field_t(t_s);
    if (b >= h.from_t && b <= h.to_t) return true;
  }
  return false;
}

double World::quadrature_fraction(double t_s) const {
  for (const Faults::Pickup& q : scenario_.faults.pickups)
    if (q.contains(t_s)) return q.fraction;
  return scenario_.lockin.quadrature_fraction;
}

bool World::heating_at(double t_s) const {
  const Faults& f = scenario_.faults;
  if (!f.heating || t_s < f.heating_start_s) return false;
  return f.heating_duration_s <= 0.0 || t_s < f.heating_start_s + f.heating_duration_s;
}

bool World::open_contact_at(double t_s) const {
  for (const Faults::Window& w : scenario_.faults.open_contacts)
    if (w.contains(t_s)) return true;
  return false;
}

double World::electron_temperature_k(double t_s) const {
  const double bath = bath_temperature_k(t_s);
  if (!heating_at(t_s)) return bath;
  return heated_temperature_k(bath, scenario_.faults.heating_floor_k,
                              scenario_.faults.heating_exponent);
}

double World::remanent_field_t(double t_s) const {
  double b = 0.0;
  for (const Faults::Remanence& r : scenario_.faults.remanences)
    if (t_s >= r.start_s) b += r.field_t;
  return b;
}

double World::true_field_t(double t_s) const { return magnet_.field_t(t_s) + remanent_field_t(t_s); }

double World::sheet_conductance_s(double t_s) const {
  return sim::sheet_conductance_s(scenario_.sample, scenario_.dephasing, true_field_t(t_s),
                                  electron_temperature_k(t_s));
}

double World::sigma0_s(double t_s) const {
  return sim::sheet_conductance_s(scenario_.sample, scenario_.dephasing, 0.0,
                                  electron_temperature_k(t_s));
}

double World::true_x_v(double t_s) const {
  if (open_contact_at(t_s)) return 0.0;  // no current: only the noise added in lockin()
  const LockinSettings& l = scenario_.lockin;
  return lockin_x_v(1.0 / sheet_conductance_s(t_s), scenario_.sample.squares, l.current_a,
                    l.gain * gain_factor(t_s));
}

double World::gain_factor(double t_s) const {
  const Faults& f = scenario_.faults;
  if (f.gain_drift_per_hour == 0.0 || t_s < f.gain_drift_start_s) return 1.0;
  return 1.0 + f.gain_drift_per_hour * (t_s - f.gain_drift_start_s) / 3600.0;
}

double World::spike_v(double t_s) const {
  const Faults& f = scenario_.faults;
  if (f.spike_probability <= 0.0) return 0.0;
  if (uniform(NoiseChannel::spike, t_s) >= f.spike_probability) return 0.0;
  const double size = f.spike_size_sigma * scenario_.noise.lockin_x_v;
  return uniform(NoiseChannel::spike_sign, t_s) < 0.5 ? -size : size;
}

double World::standard_normal(NoiseChannel c, double t_s) const {
  const double index = std::floor(std::max(t_s, 0.0) / scenario_.noise.sample_interval_s);
  std::uint64_t h = mix64(scenario_.seed + 0x9E3779B97F4A7C15ULL);
  h = mix64(h ^ static_cast<std::uint64_t>(c));
  h = mix64(h ^ static_cast<std::uint64_t>(index));
  return synthetic::NormalSource(h).next();
}

double World::uniform(NoiseChannel c, double t_s) const {
  const double index = std::floor(std::max(t_s, 0.0) / scenario_.noise.sample_interval_s);
  std::uint64_t h = mix64(scenario_.seed + 0x9E3779B97F4A7C15ULL);
  h = mix64(h ^ static_cast<std::uint64_t>(c));
  h = mix64(h ^ static_cast<std::uint64_t>(index));
  return static_cast<double>(h >> 11) * 0x1.0p-53;  // the top 53 bits
}

// A first-order (6 dB/octave) output filter: the reading is
//   X_out(t) = int_0^inf X(t - s) exp(-s/tau) ds/tau,
// which after u = 1 - exp(-s/tau) is the plain average of X(t + tau ln(1 - u))
// over u in (0, 1): evaluated with the midpoint rule on kFilterNodes nodes.
// Before t = 0 the sample sat in its t = 0 state. After a step the reading
// relaxes as 1 - exp(-dt/tau), the settling a poller must wait out.
LockinReading World::lockin(double t_s, double set_time_constant_s, double range_v) const {
  const double time_constant_s = lockin_time_constant_s(t_s, set_time_constant_s);
  double x = 0.0;
  if (time_constant_s <= 0.0) {
    x = true_x_v(t_s);
  } else {
    for (int i = 0; i < kFilterNodes; ++i) {
      const double u = (i + 0.5) / kFilterNodes;
      x += true_x_v(std::max(0.0, t_s + time_constant_s * std::log1p(-u)));
    }
    x /= kFilterNodes;
  }
  LockinReading r;
  r.x_v = x + scenario_.noise.lockin_x_v * standard_normal(NoiseChannel::lockin_x, t_s) + spike_v(t_s);
  r.y_v = quadrature_fraction(t_s) * x +
          scenario_.noise.lockin_y_v * standard_normal(NoiseChannel::lockin_y, t_s);
  const double range = lockin_range_v(t_s, range_v);
  r.overload = std::abs(r.x_v) >= range || std::abs(r.y_v) >= range;
  return r;
}

ThermometerReading World::thermometer(double t_s) const {
  for (const Faults::Window& w : scenario_.faults.stuck) {
    if (w.contains(t_s)) {
      t_s = w.start_s;
      break;
    }
  }
  ThermometerReading r;
  r.temperature_k = bath_temperature_k(t_s) *
                    (1.0 + scenario_.noise.temperature_rel *
                               standard_normal(NoiseChannel::temperature, t_s));
  const ThermometerSettings& c = scenario_.thermometer;
  r.resistance_ohm = c.r0_ohm * std::exp(std::sqrt(c.t0_k / r.temperature_k));
  return r;
}

double World::field_reading_t(double t_s) const {
  return magnet_.field_t(std::max(0.0, t_s - scenario_.faults.field_lag_s)) +
         scenario_.noise.field_t * standard_normal(NoiseChannel::field, t_s);
}

Truth World::truth(double from_s, double to_s) const {
  Truth t;
  t.at_s = 0.5 * (from_s + to_s);
  t.temperature_k = bath_temperature_k(t.at_s);
  t.electron_temperature_k = electron_temperature_k(t.at_s);
  t.lphi_m = lphi_m(scenario_.sample, scenario_.dephasing, t.electron_temperature_k);
  t.sigma0_s = sigma0_s(t.at_s);
  t.heating = heating_at(t.at_s);
  t.manual_field = magnet_.manual_during(from_s, to_s);
  t.field_offset_t = remanent_field_t(t.at_s);
  t.field_lag_s = scenario_.faults.field_lag_s;
  t.lockin_time_constant_s = lockin_time_constant_s(t.at_s, scenario_.lockin.time_constant_s);
  t.gain_factor = gain_factor(t.at_s);
  t.temperature_start_k = bath_temperature_k(from_s);
  t.temperature_end_k = bath_temperature_k(to_s);
  for (const Faults::Hole& h : scenario_.faults.holes) {
    const bool overlaps = h.start_s < to_s && (h.duration_s <= 0.0 || h.start_s + h.duration_s > from_s);
    if (!overlaps) continue;
    t.lockin_hole = true;
    t.hole_from_t = h.from_t;
    t.hole_to_t = h.to_t;
  }
  return t;
}

}  // namespace lphi::sim
