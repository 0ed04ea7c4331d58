#include "schema/status.hpp"

namespace lphi {

std::string_view status_code_name(StatusCode code) {
  switch (code) {
    case StatusCode::ok: return "ok";
    case StatusCode::invalid_input: return "invalid_input";
    case StatusCode::not_found: return "not_found";
    case StatusCode::conflict: return "conflict";
    case StatusCode::unavailable: return "unavailable";
    case StatusCode::storage: return "storage";
    case StatusCode::io: return "io";
    case StatusCode::internal: return "internal";
  }
  return "internal";
}

}  // namespace lphi
