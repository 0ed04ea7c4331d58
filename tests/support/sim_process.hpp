// The real lphi-sim process for integration tests, a thin layer on
// ChildProcess (child_process.hpp) that knows lphi-sim's arguments and its
// readiness (the ports file appearing), and a small line-based TCP client.
// Every wait is bounded. Not thread-safe: one object per test thread.
#pragma once

#include <chrono>
#include <optional>
#include <string>
#include <vector>

#include "tests/support/child_process.hpp"
#include "tests/support/temp_dir.hpp"

namespace lphi::testing {

class SimProcess {
 public:
  SimProcess();   // makes a fresh temporary directory
  ~SimProcess();  // kills a still-running process and removes the directory
  SimProcess(const SimProcess&) = delete;
  SimProcess& operator=(const SimProcess&) = delete;

  const std::string& dir() const { return dir_.path(); }
  std::string write_file(const std::string& name, const std::string& text) const;

  // Starts lphi-sim SCENARIO --ports-file DIR/ports.json --truth DIR/truth.jsonl
  // plus `extra`, and waits (at most 20 s) for the ports file.
  bool start(const std::string& scenario_path, const std::vector<std::string>& extra);
  int port(const std::string& instrument) const;  // "lockin", "thermometer", "magnet"

  // Waits up to `timeout` for the process to exit by itself; its exit status,
  // or -1 (then it is killed).
  int wait(std::chrono::milliseconds timeout);
  int stop();  // SIGTERM, then wait up to 10 s
  std::string truth_path() const { return dir_.file("truth.jsonl"); }
  std::string stderr_text() const;

 private:
  TempDir dir_;
  ChildProcess process_;
  int ports_[3] = {0, 0, 0};
};

// A blocking TCP client with a deadline on every operation (poll(2)).
class LineClient {
 public:
  LineClient() = default;
  ~LineClient();
  LineClient(const LineClient&) = delete;
  LineClient& operator=(const LineClient&) = delete;

  bool connect(int port, std::chrono::milliseconds timeout);
  bool send(const std::string& text);  // sent as is (add the '\n' yourself)
  // The next line without its terminator; nullopt on timeout or when closed.
  std::optional<std::string> read_line(std::chrono::milliseconds timeout);
  std::optional<std::string> query(const std::string& line, std::chrono::milliseconds timeout);
  bool closed() const { return closed_; }  // the peer closed (EOF or reset seen)
  void close();

 private:
  int fd_ = -1;
  std::string buffer_;
  bool closed_ = false;
};

// Comma-separated fields as numbers (NaN for a field that is not one).
std::vector<double> fields(const std::string& reply);

}  // namespace lphi::testing
