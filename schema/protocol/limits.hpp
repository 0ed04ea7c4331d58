// The limits of a reading that lphi accepts, in one place: the codec refuses
// a reading outside them (protocol/reading_checks.cpp), `lphi replay` refuses such a
// row of a recording before sending it (daemon/client/recording_csv.cpp).
// They are sanity bounds on what a dilution or helium cryostat can report,
// not physics: a value beyond them is a unit or wiring mistake.
//
// Header only, constexpr, no state: safe everywhere.
#pragma once

#include <cmath>
#include <cstdint>

namespace lphi::protocol::limits {

// Temperature: 0 < T < 1000 K (both bounds excluded).
inline constexpr double min_temperature_k = 0.0;
inline constexpr double max_temperature_k = 1000.0;
// Magnetic field: |B| < 50 T, beyond any laboratory magnet's range.
inline constexpr double max_abs_field_t = 50.0;
// Largest seq accepted: SQLite integers are signed 64-bit, and JSON numbers
// beyond 2^53 lose precision in many languages' encoders.
inline constexpr std::int64_t max_seq = std::int64_t{1} << 53;

// The checks, written so that NaN fails every one of them.
constexpr bool temperature_in_range(double temperature_k) {
  return temperature_k > min_temperature_k && temperature_k < max_temperature_k;
}
constexpr bool field_in_range(double field_t) {
  return field_t > -max_abs_field_t && field_t < max_abs_field_t;
}

// A finite value above zero (a frequency, a range, a scale); NaN and
// infinity are not positive.
inline bool positive(double x) { return std::isfinite(x) && x > 0.0; }
// A finite value at or above zero.
inline bool non_negative(double x) { return std::isfinite(x) && x >= 0.0; }

}  // namespace lphi::protocol::limits
