// The limits of a reading that lphi accepts, in one place: the codec refuses
// a reading outside them (protocol/reading_checks.cpp, so lphid's ingest and
// `lphi send`), and the client's file readers refuse such a row before
// anything is sent or fitted (daemon/client/recording_csv.cpp for `lphi
// replay`, daemon/client/column_map.cpp for `lphi fit` and `lphi dephasing`).
// They are sanity bounds on what a dilution or helium cryostat can report,
// not physics: a value beyond them is a unit or wiring mistake, and the
// refusal says which unit the value most likely was in.
//
// The numbers are constexpr; the refusal texts (limits.cpp) take them from
// here, so a changed bound changes every message. No state: safe everywhere.
#pragma once

#include <cmath>
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>

namespace lphi::protocol::limits {

// Temperature: 0 < T < 1000 K (both bounds excluded).
inline constexpr double min_temperature_k = 0.0;
inline constexpr double max_temperature_k = 1000.0;
// Magnetic field: |B| <= 30 T. The superconducting magnets of dilution and
// helium cryostats reach about 20 T (common practice, from memory); a
// reading above 30 T is almost always a field in mT or G read as tesla.
inline constexpr double max_abs_field_t = 30.0;
// Largest seq accepted: SQLite integers are signed 64-bit, and JSON numbers
// beyond 2^53 lose precision in many languages' encoders.
inline constexpr std::int64_t max_seq = std::int64_t{1} << 53;

// The checks, written so that NaN fails every one of them.
constexpr bool temperature_in_range(double temperature_k) {
  return temperature_k > min_temperature_k && temperature_k < max_temperature_k;
}
constexpr bool field_in_range(double field_t) {
  return field_t >= -max_abs_field_t && field_t <= max_abs_field_t;
}

// Why a value is refused, for a message: `text` names the value and the
// bound ("45 T is beyond the 30 T lphi accepts in magnitude"), `likely_unit`
// is the unit the number was most likely written in when it is too large
// ("mT"; empty when no unit makes it plausible, e.g. a negative
// temperature), and `hint` is the question to the user with that unit
// ("is it in mT? 45 mT would be 0.045 T"; empty with likely_unit).
struct LimitRefusal {
  std::string text;
  std::string_view likely_unit;
  std::string hint;
  // text, then ": " and the hint when there is one.
  std::string with_hint() const { return hint.empty() ? text : text + ": " + hint; }
};
// Nothing when the value is within the limit.
std::optional<LimitRefusal> field_refusal(double field_t);
std::optional<LimitRefusal> temperature_refusal(double temperature_k);

// A finite value above zero (a frequency, a range, a scale); NaN and
// infinity are not positive.
inline bool positive(double x) { return std::isfinite(x) && x > 0.0; }
// A finite value at or above zero.
inline bool non_negative(double x) { return std::isfinite(x) && x >= 0.0; }

}  // namespace lphi::protocol::limits
