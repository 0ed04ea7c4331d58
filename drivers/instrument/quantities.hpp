// The quantities a driver can fill, how fields are parsed into them, and how
// they become one reading of the source's kind.
//
// Parsing is strict: a field is a number only when all of it is one (after
// trimming blanks and an explicit '+'), finite, and not one of SCPI's
// "not a number" / overflow markers (9.9E37 and 9.91E37, common practice of
// SCPI instruments); anything else makes the whole line garbage. A reading is
// never made from a half-understood reply.
#pragma once

#include <array>
#include <cstddef>
#include <optional>
#include <string>
#include <string_view>
#include <variant>
#include <vector>

#include "schema/protocol/reading.hpp"
#include "drivers/instrument/driver_config.hpp"

namespace lphi::drivers {

enum class Quantity {
  x_v, y_v, frequency_hz, range_v, time_constant_s, overload,
  temperature_k, resistance_ohm, field_t, time_s,
};
inline constexpr std::size_t quantity_count = 10;

std::optional<Quantity> parse_quantity(std::string_view name);
std::string_view quantity_name(Quantity q);
bool allowed_for(protocol::SourceKind kind, Quantity q);
bool is_boolean(Quantity q);
// "x_v, y_v, ..." for error messages.
std::string allowed_names(protocol::SourceKind kind);
std::vector<Quantity> required_for(protocol::SourceKind kind);

// The values found in one poll or line (booleans as 0 or 1).
struct QuantityValues {
  std::array<std::optional<double>, quantity_count> values;
  std::optional<double>& operator[](Quantity q) { return values[static_cast<std::size_t>(q)]; }
  const std::optional<double>& operator[](Quantity q) const {
    return values[static_cast<std::size_t>(q)];
  }
};

std::optional<double> parse_number(std::string_view text);
std::optional<bool> parse_boolean(std::string_view text);
std::vector<std::string_view> split_fields(std::string_view line, char delimiter);

// Fill `out` from a delimited line (a SCPI reply or a CSV line). Empty when
// all mapped fields were found and parsed, else what was wrong.
std::string extract_delimited(const std::vector<FieldMap>& fields, std::string_view line,
                              char delimiter, QuantityValues& out);
// Fill `out` from a line holding one JSON object.
std::string extract_json(const std::vector<FieldMap>& fields, std::string_view line,
                         QuantityValues& out);

using Reading = std::variant<protocol::LockinReading, protocol::ThermometerReading,
                             protocol::FieldReading>;

// One reading of `kind` from the values; `arrival_t_s` (seconds since the
// Unix epoch) is its time unless the values carry time_s. Nothing when a
// required quantity is missing (the caller counts a garbage reply). The seq
// is left 0; the outlet assigns it.
std::optional<Reading> make_reading(protocol::SourceKind kind, const QuantityValues& values,
                                    double arrival_t_s);

// Checks a field list for a kind (known quantities, each once, required ones
// present, finite non-zero scales); empty when fine. `json` asks for keys.
std::string check_fields(protocol::SourceKind kind, const std::vector<FieldMap>& fields,
                         bool json, std::string_view where);

}  // namespace lphi::drivers
