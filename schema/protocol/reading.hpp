// The three kinds of instrument readings lphi ingests, as plain values.
//
// `t` is the instrument-side time of the reading in seconds since the Unix
// epoch (not the arrival time). `seq` is the per-source sequence number that
// makes (source, seq) unique: a resent reading is recognised as a duplicate,
// a missing one as a gap.
#pragma once

#include <cstdint>
#include <optional>
#include <string_view>
#include <variant>
#include <vector>

namespace lphi::protocol {

enum class SourceKind { lockin, thermometer, field };

std::string_view kind_name(SourceKind kind);
std::optional<SourceKind> parse_kind(std::string_view name);

// A lock-in amplifier's in-phase and quadrature voltages (rms, volts).
struct LockinReading {
  std::int64_t seq = 0;
  double t = 0.0;
  double x_v = 0.0;
  double y_v = 0.0;
  std::optional<double> frequency_hz;
  std::optional<double> range_v;
  std::optional<double> time_constant_s;
  std::optional<bool> overload;
  bool operator==(const LockinReading&) const = default;
};

struct ThermometerReading {
  std::int64_t seq = 0;
  double t = 0.0;
  double temperature_k = 0.0;
  std::optional<double> resistance_ohm;
  bool operator==(const ThermometerReading&) const = default;
};

struct FieldReading {
  std::int64_t seq = 0;
  double t = 0.0;
  double field_t = 0.0;
  bool operator==(const FieldReading&) const = default;
};

// The readings of one batch: all of one source, hence of one kind.
using Readings = std::variant<std::vector<LockinReading>, std::vector<ThermometerReading>,
                              std::vector<FieldReading>>;

Readings empty_readings(SourceKind kind);
SourceKind kind_of(const Readings& readings);
std::size_t reading_count(const Readings& readings);

}  // namespace lphi::protocol
