// Reading a file the tests' child processes wrote (logs, ports files).
#pragma once

#include <fstream>
#include <sstream>
#include <string>

namespace lphi::testing {

// The whole file as text; "" when it cannot be opened.
inline std::string read_text_file(const std::string& path) {
  std::ifstream in(path);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

}  // namespace lphi::testing
