// Runs a program to its end with a text as its standard input and captures
// its output: the short form of child_process.hpp's run_program for the
// client's command-line tests. Waits at most ten minutes (a hung program is
// killed and reported with exit code -1, it does not hang the test run).
#pragma once

#include <string>
#include <vector>

#include "tests/support/child_process.hpp"
#include "tests/support/temp_dir.hpp"

namespace lphi::testing {

// Runs `program args...` with stdin_text as its standard input.
ProgramResult run_program(const std::string& program, const std::vector<std::string>& args,
                          const std::string& stdin_text = "");

}  // namespace lphi::testing
