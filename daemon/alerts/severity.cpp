#include "daemon/alerts/severity.hpp"

namespace lphi::alerts {

std::string_view severity_name(Severity severity) {
  switch (severity) {
    case Severity::info: return "info";
    case Severity::warning: return "warning";
    case Severity::critical: return "critical";
  }
  return "warning";
}

std::optional<Severity> parse_severity(std::string_view name) {
  if (name == "info") return Severity::info;
  if (name == "warning") return Severity::warning;
  if (name == "critical") return Severity::critical;
  return std::nullopt;
}

std::string_view state_name(State state) {
  switch (state) {
    case State::raised: return "raised";
    case State::acknowledged: return "acknowledged";
    case State::cleared: return "cleared";
  }
  return "raised";
}

std::optional<State> parse_state(std::string_view name) {
  if (name == "raised") return State::raised;
  if (name == "acknowledged") return State::acknowledged;
  if (name == "cleared") return State::cleared;
  return std::nullopt;
}

}  // namespace lphi::alerts
