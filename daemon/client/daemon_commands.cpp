#include "daemon/client/daemon_commands.hpp"

namespace lphi::client {

void register_daemon_commands(CLI::App& /*app*/, int* /*exit_code*/) {}

}  // namespace lphi::client
