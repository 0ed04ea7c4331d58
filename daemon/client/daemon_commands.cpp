#include "daemon/client/daemon_commands.hpp"

#include "daemon/client/daemon_locate.hpp"

namespace lphi::client {

void register_daemon_commands(CLI::App& app, int* exit_code) {
  register_send_command(app, exit_code);
  register_export_command(app, exit_code);
  register_status_command(app, exit_code);
}

}  // namespace lphi::client
