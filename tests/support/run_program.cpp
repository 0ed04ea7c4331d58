#include "tests/support/run_program.hpp"

#include <chrono>

namespace lphi::testing {

ProgramResult run_program(const std::string& program, const std::vector<std::string>& args,
                          const std::string& stdin_text) {
  Launch launch;
  launch.args.push_back(program);
  launch.args.insert(launch.args.end(), args.begin(), args.end());
  launch.stdin_text = stdin_text;
  return run_program(launch, std::chrono::minutes(10));
}

}  // namespace lphi::testing
