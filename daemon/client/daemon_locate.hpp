// How the daemon sub-commands of lphi find lphid: through its data directory
// (--data-dir DIR or LPHI_DATA_DIR), which holds the database and records the
// endpoints of the sockets.
#pragma once

#include <CLI/CLI.hpp>
#include <optional>
#include <string>

#include "daemon/config/data_dir.hpp"

namespace lphi::client {

// Adds --data-dir to one sub-command.
void add_data_dir_option(CLI::App& command, std::string& data_dir);

// The data directory, or nothing after printing a usage error.
std::optional<std::string> locate_data_dir(const std::string& option);

void register_send_command(CLI::App& app, int* exit_code);
void register_export_command(CLI::App& app, int* exit_code);
void register_status_command(CLI::App& app, int* exit_code);

}  // namespace lphi::client
