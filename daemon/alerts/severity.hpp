// An alert's severity and its lifecycle state, with their names as they
// appear in the config, the database, the control replies and the events.
#pragma once

#include <optional>
#include <string_view>

namespace lphi::alerts {

enum class Severity { info, warning, critical };
enum class State { raised, acknowledged, cleared };

// "info" | "warning" | "critical"
std::string_view severity_name(Severity severity);
std::optional<Severity> parse_severity(std::string_view name);

// "raised" | "acknowledged" | "cleared"
std::string_view state_name(State state);
std::optional<State> parse_state(std::string_view name);

}  // namespace lphi::alerts
