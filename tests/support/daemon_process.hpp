// Runs the real lphid (and lphi) as child processes for integration tests: a
// thin layer on ChildProcess (child_process.hpp) that knows lphid's
// arguments and its readiness. Every wait is bounded; readiness is polled on
// the control socket. Not thread-safe: one object per test thread.
#pragma once

#include <chrono>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <vector>

#include "tests/support/child_process.hpp"

namespace lphi::testing {

// Three sources, one of each kind (lockin-a, mxc, magnet), and one sample
// (film-a, hln2d) using them. sample_extra is appended to the [[sample]]
// table (more keys of film-a), tail after it (more tables, e.g. [alerts.*]).
std::string test_config(const std::string& sample_extra = "", const std::string& tail = "");
// One [[sample]] table named `name` on those three sources (hln2d, 5 squares,
// 20 um wide, 10 nm thick, 10 nA), with `extra` keys appended.
std::string test_sample(const std::string& name, const std::string& extra = "");

class DaemonProcess {
 public:
  DaemonProcess(std::string data_dir, std::string config_path);
  ~DaemonProcess();
  DaemonProcess(const DaemonProcess&) = delete;
  DaemonProcess& operator=(const DaemonProcess&) = delete;

  // Starts lphid and waits until it answers status (false after 30 s).
  bool start();
  void kill_hard();  // SIGKILL, then reap
  // SIGTERM and wait for a clean exit; returns the exit status (-1 on timeout).
  int stop();
  bool running() const { return process_.running(); }
  std::optional<nlohmann::json> status(std::chrono::milliseconds timeout) const;

 private:
  std::string data_dir_, config_path_;
  ChildProcess process_;
};

using RunResult = ProgramResult;

// Runs a program with stdin from a file ("" for /dev/null), capturing output
// (child_process.hpp's run_program with these three arguments).
RunResult run_program(const std::vector<std::string>& args, const std::string& stdin_path,
                      std::chrono::seconds timeout);

}  // namespace lphi::testing
