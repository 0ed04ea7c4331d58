// ChildProcess: the one launcher of lphi's tests for real programs (lphi,
// lphid, lphi-sim). It starts a program with arguments, extra environment
// and standard input (a text, a file or /dev/null), sends its standard output
// and error to files (given ones, or private ones it reads back), waits with
// a bound, and kills the program (SIGKILL, then reaps it) when the object
// goes away while it still runs: no test leaves a process behind.
//
// Exit statuses: the program's exit code; 128 + the signal when a signal
// ended it; -1 when it had to be killed after a timeout (or never started).
//
// Not thread-safe: one ChildProcess belongs to the test thread that made it.
#pragma once

#include <sys/types.h>

#include <chrono>
#include <optional>
#include <string>
#include <vector>

#include "tests/support/temp_dir.hpp"

namespace lphi::testing {

struct Launch {
  std::vector<std::string> args;          // args[0]: the program's path
  std::vector<std::string> env;           // "NAME=value", added to this process's environment
  std::optional<std::string> stdin_text;  // standard input from this text...
  std::string stdin_path;                 // ...or from this file; neither: /dev/null
  std::string stdout_path, stderr_path;   // empty: captured in a private directory
};

class ChildProcess {
 public:
  ChildProcess() = default;
  ~ChildProcess();
  ChildProcess(const ChildProcess&) = delete;
  ChildProcess& operator=(const ChildProcess&) = delete;

  // Starts the program; false when it cannot be started (no such file, ...).
  bool start(const Launch& launch);
  bool running() const { return pid_ > 0; }
  pid_t pid() const { return pid_; }

  // The exit status if the program has ended (reaped now), nothing while it runs.
  std::optional<int> poll();
  // Waits up to `timeout` for the program to end; kills it after that (-1).
  int wait(std::chrono::milliseconds timeout);
  // Sends a signal (SIGTERM for a clean stop); nothing if it has ended.
  void signal(int signal_number);
  // SIGKILL and reap, now.
  void kill_hard();

  std::string stdout_text() const;
  std::string stderr_text() const;

 private:
  std::optional<TempDir> capture_;
  std::string stdout_path_, stderr_path_;
  pid_t pid_ = -1;
};

struct ProgramResult {
  int exit_code = -1;  // as ChildProcess::wait
  std::string out;
  std::string err;
};

// Runs a program to its end (at most `timeout`), capturing its output.
ProgramResult run_program(const Launch& launch, std::chrono::milliseconds timeout);

// The whole file as text; "" when it cannot be opened.
std::string read_text_file(const std::string& path);

}  // namespace lphi::testing
