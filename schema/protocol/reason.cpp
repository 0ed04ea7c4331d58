#include "schema/protocol/reason.hpp"

namespace lphi::protocol {

namespace {
constexpr std::array<std::string_view, reason_count> names = {
    "bad_envelope",       "frame_too_large",
    "bad_encoding",       "not_an_object",
    "unknown_type",       "missing_field",
    "wrong_type",         "unknown_field",
    "bad_name",           "unknown_source",
    "wrong_kind",         "empty_batch",
    "batch_too_large",    "source_has_driver",
    "bad_seq",
    "seq_not_increasing", "not_finite",
    "temperature_out_of_range", "field_out_of_range",
    "value_out_of_range", "time_out_of_range",
    "storage_error",      "shutting_down",
};
}  // namespace

std::string_view reason_name(Reason reason) { return names[static_cast<std::size_t>(reason)]; }

std::optional<Reason> parse_reason(std::string_view name) {
  for (std::size_t i = 0; i < names.size(); ++i) {
    if (names[i] == name) return static_cast<Reason>(i);
  }
  return std::nullopt;
}

bool is_retryable(Reason reason) {
  return reason == Reason::storage_error || reason == Reason::shutting_down;
}

}  // namespace lphi::protocol
