// Sub-commands of lphi that talk to a running lphid (send, export, status, ...).
#pragma once

#include <CLI/CLI.hpp>

namespace lphi::client {

// Adds the daemon sub-commands (and their shared --data-dir option) to app.
// Each sub-command's callback sets *exit_code.
void register_daemon_commands(CLI::App& app, int* exit_code);

}  // namespace lphi::client
