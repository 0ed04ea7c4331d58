// Scenario files: TOML, human-edited, with comments. Every key is checked:
// an unknown key, a wrong type or an unusable value is an error naming the
// line and the key, e.g. "scenario.toml:12: unknown key 'sample.widht_m'".
// The format is documented in drivers/sim/COMMANDS.md and by the shipped
// files in drivers/sim/scenarios/.
#pragma once

#include <optional>
#include <string>
#include <string_view>

#include "drivers/sim/scenario.hpp"

namespace lphi::sim {

struct ScenarioLoad {
  std::optional<Scenario> scenario;  // set on success
  std::string error;                 // set on failure
};

// `origin` names the source in messages (a file name).
ScenarioLoad parse_scenario(std::string_view toml_text, std::string_view origin);
ScenarioLoad load_scenario_file(const std::string& path);

}  // namespace lphi::sim
