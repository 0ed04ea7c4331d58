// Two small helpers shared by the files of the wire codec (codec.cpp,
// reading_checks.cpp); internal to the codec, nothing else includes it.
// refuse() builds the Refusal a check returns; type_name() names a decoded
// value's JSON type for a refusal's detail.
//
// Pure inline functions: safe from any thread.
#pragma once

#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <utility>

#include "schema/protocol/codec.hpp"

namespace lphi::protocol::detail {

inline std::optional<Refusal> refuse(Reason reason, std::string detail) {
  return Refusal{reason, std::move(detail)};
}

inline std::string type_name(const nlohmann::json& v) { return v.type_name(); }

}  // namespace lphi::protocol::detail
