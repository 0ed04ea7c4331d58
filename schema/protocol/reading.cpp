#include "schema/protocol/reading.hpp"

namespace lphi::protocol {

std::string_view kind_name(SourceKind kind) {
  switch (kind) {
    case SourceKind::lockin: return "lockin";
    case SourceKind::thermometer: return "thermometer";
    case SourceKind::field: return "field";
  }
  return "?";
}

std::optional<SourceKind> parse_kind(std::string_view name) {
  if (name == "lockin") return SourceKind::lockin;
  if (name == "thermometer") return SourceKind::thermometer;
  if (name == "field") return SourceKind::field;
  return std::nullopt;
}

Readings empty_readings(SourceKind kind) {
  switch (kind) {
    case SourceKind::lockin: return std::vector<LockinReading>{};
    case SourceKind::thermometer: return std::vector<ThermometerReading>{};
    case SourceKind::field: return std::vector<FieldReading>{};
  }
  return std::vector<LockinReading>{};
}

SourceKind kind_of(const Readings& readings) {
  return static_cast<SourceKind>(readings.index());
}

std::size_t reading_count(const Readings& readings) {
  return std::visit([](const auto& v) { return v.size(); }, readings);
}

}  // namespace lphi::protocol
