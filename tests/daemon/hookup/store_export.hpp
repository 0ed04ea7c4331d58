// Small helpers shared by the hookup tests: reading lphid's log and the
// readings it stored (through the real `lphi export`).
#pragma once

#include <gtest/gtest.h>

#include <chrono>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>
#include <vector>

#include "tests/support/daemon_process.hpp"

namespace lphi::testing {

inline std::string slurp(const std::string& path) {
  std::ifstream in(path);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

// Every stored reading of `source`, in seq order, via `lphi export --format jsonl`.
inline std::vector<nlohmann::json> export_readings(const std::string& dir, const std::string& source) {
  using namespace std::chrono_literals;
  const auto r = run_program({LPHI_PATH, "export", "readings", "--data-dir", dir, "--source", source,
                              "--format", "jsonl"},
                             "", 30s);
  EXPECT_EQ(r.exit_code, 0) << r.err;
  std::vector<nlohmann::json> out;
  std::istringstream lines(r.out);
  for (std::string line; std::getline(lines, line);) {
    if (!line.empty()) out.push_back(nlohmann::json::parse(line));
  }
  return out;
}

}  // namespace lphi::testing
