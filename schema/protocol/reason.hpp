// Why a message or a reading was refused. Every refusal carries one of these
// codes to the sender, to the daemon's counters and to its log. The names
// (reason_name) are part of the wire protocol: never rename one.
#pragma once

#include <array>
#include <cstddef>
#include <optional>
#include <string_view>

namespace lphi::protocol {

enum class Reason {
  // The whole message is refused.
  bad_envelope,       // wrong number of ZeroMQ frames
  frame_too_large,    // the payload exceeds ingest.max_frame_bytes
  bad_encoding,       // neither valid JSON nor valid MessagePack (e.g. truncated)
  not_an_object,      // the message, or a reading, is not a map/object
  unknown_type,       // "type" names no request lphid knows
  missing_field,      // a required key is absent
  wrong_type,         // a key holds the wrong type (a string for a number, ...)
  unknown_field,      // a key lphi does not know (typos must not pass silently)
  bad_name,           // a name that is empty, too long, not UTF-8 or has control characters
  unknown_source,     // the source is not configured
  wrong_kind,         // the source is of another kind than the message or reading says
  empty_batch,        // a batch without readings
  batch_too_large,    // more readings than ingest.max_batch_readings
  source_has_driver,  // lphid reads this source with its own driver; no other sender may
  // One reading is refused.
  bad_seq,                   // a sequence number that is negative or too large
  seq_not_increasing,        // sequence numbers within a batch must increase
  not_finite,                // NaN or infinity
  temperature_out_of_range,  // temperature_k not in (0, 1000) K (limits.hpp)
  field_out_of_range,        // |field_t| above 30 T (limits.hpp)
  value_out_of_range,        // another value outside its physical range
  time_out_of_range,         // t not positive, too far ahead of the clock or behind the source
  // Transient: the sender should try again later.
  storage_error,  // the database refused the write
  shutting_down,  // lphid is stopping
};

inline constexpr std::size_t reason_count = static_cast<std::size_t>(Reason::shutting_down) + 1;

std::string_view reason_name(Reason reason);
std::optional<Reason> parse_reason(std::string_view name);
// True for the reasons after which the same message may succeed later.
bool is_retryable(Reason reason);

}  // namespace lphi::protocol
