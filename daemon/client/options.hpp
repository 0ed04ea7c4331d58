// Helpers shared by the offline sub-commands: optional numeric options and
// the checks every number given on the command line goes through.
#pragma once

#include <cmath>
#include <memory>
#include <optional>
#include <string>

#include <CLI/CLI.hpp>

#include "analysis/magnetoconductance.hpp"
#include "daemon/client/format.hpp"

namespace lphi::client {

// An option that may be absent: `target` stays empty unless it is given.
// `target` must outlive the parse (it lives in a request held by the app).
inline CLI::Option* add_optional(CLI::App* app, const std::string& name,
                                 std::optional<double>& target, const std::string& help) {
  return app->add_option_function<double>(
      name, [&target](const double& value) { target = value; }, help);
}

// "" when value is absent or finite and > 0, else the error message.
inline std::string check_positive(const std::string& option, std::optional<double> value) {
  if (!value || (std::isfinite(*value) && *value > 0.0)) return {};
  return option + " must be a positive number, got " + format_number(*value, 6);
}

inline std::string check_finite(const std::string& option, std::optional<double> value) {
  if (!value || std::isfinite(*value)) return {};
  return option + " must be a finite number, got " + format_number(*value, 6);
}

// Models as the command line, the config file and the JSON output spell
// them (mc::model_name): "hln2d", "hln2d-so", "wire1d", "kawabata3d".
inline std::optional<mc::Model> model_from_cli_name(const std::string& name) {
  return mc::model_from_name(name);
}

inline constexpr const char* cli_model_list = "hln2d, hln2d-so, wire1d or kawabata3d";

}  // namespace lphi::client
