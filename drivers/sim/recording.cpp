#include "drivers/sim/recording.hpp"

#include <fmt/format.h>
#include <cmath>
#include <cstdio>

namespace lphi::sim {

std::string recording_error(const RecordingOptions& o) {
  if (!std::isfinite(o.rate_hz) || o.rate_hz <= 0 || o.rate_hz > kMaxRecordingRateHz) {
    return fmt::format("--rate-hz must be > 0 and at most {:g} (got {:g})", kMaxRecordingRateHz,
                       o.rate_hz);
  }
  if (o.thermometer_every < 1) {
    return fmt::format("--thermometer-every must be at least 1 (got {})", o.thermometer_every);
  }
  if (!std::isfinite(o.duration_s) || o.duration_s < 0) {
    return fmt::format("--duration-s must be >= 0 (got {:g})", o.duration_s);
  }
  return {};
}

bool lockin_answers(const Scenario& s, double t_s) {
  for (const auto& d : s.faults.dropouts)
    if (d.contains(t_s)) return false;
  return true;
}

Recorder::Recorder(const World& world, const RecordingOptions& options, double range_v,
                   double time_constant_s)
    : world_(&world), options_(options), range_v_(range_v), time_constant_s_(time_constant_s) {
  end_s_ = options.duration_s > 0 ? options.duration_s : world.schedule().end_s();
  rows_ = static_cast<std::int64_t>(std::floor(end_s_ * options.rate_hz)) + 1;
}

RecordedRow Recorder::at(double t_s, bool with_temperature) const {
  RecordedRow r;
  r.t_s = t_s;
  r.field_t = world_->field_reading_t(t_s);
  if (with_temperature) {
    r.has_temperature = true;
    r.temperature_k = world_->thermometer(t_s).temperature_k;
  }
  if (lockin_answers(world_->scenario(), t_s) && !world_->lockin_in_hole(t_s)) {
    r.has_lockin = true;
    r.lockin = world_->lockin(t_s, time_constant_s_, range_v_);
    r.time_constant_s = world_->lockin_time_constant_s(t_s, time_constant_s_);
  }
  return r;
}

RecordedRow Recorder::row(std::int64_t k) const {
  RecordedRow r = at(static_cast<double>(k) / options_.rate_hz, k % options_.thermometer_every == 0);
  r.index = k;
  return r;
}

}  // namespace lphi::sim
