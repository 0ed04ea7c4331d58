#include "daemon/client/daemon_locate.hpp"

#include <iostream>

namespace lphi::client {

void add_data_dir_option(CLI::App& command, std::string& data_dir) {
  command.add_option("--data-dir", data_dir,
                     "lphid's data directory (default: $LPHI_DATA_DIR)");
}

std::optional<std::string> locate_data_dir(const std::string& option) {
  auto dir = config::resolve_data_dir(option);
  if (!dir) {
    std::cerr << "lphi: give lphid's data directory with --data-dir DIR or LPHI_DATA_DIR\n";
    return std::nullopt;
  }
  return config::absolute_data_dir(*dir);
}

}  // namespace lphi::client
