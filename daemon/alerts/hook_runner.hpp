// HookRunner: runs the configured command once per alert change, with the
// alert's JSON on stdin, on a thread of its own.
//
// The command is an argv (no shell), started with posix_spawnp in a process
// group of its own. Its stdout and stderr go to the log, line by line. A run
// that has not ended after timeout_s is stopped: SIGTERM to its process
// group, SIGKILL two seconds later. submit() never blocks: a change beyond
// max_per_minute in any 60 s window, or beyond the queue's capacity, is
// dropped and counted.
//
// Failure: an exception that escapes a run is caught at the thread's entry
// (health::run_guarded), logged and counted; the hook is then marked failed
// (Counters::failed_error), its thread ends, and every later change is
// dropped and counted as a failure. lphid goes on, and `lphi status` lists
// the part "alert-hook".
//
// Thread safety: every public member may be called from any thread.
#pragma once

#include <atomic>
#include <chrono>
#include <condition_variable>
#include <cstdint>
#include <deque>
#include <mutex>
#include <string>
#include <thread>
#include <vector>

namespace lphi::alerts {

class HookRunner {
 public:
  struct Counters {
    std::uint64_t runs = 0;
    std::uint64_t failures = 0;   // did not start, exited non-zero, or died by a signal
    std::uint64_t timeouts = 0;   // stopped after timeout_s (also counted as failures)
    std::uint64_t rate_limited = 0;
    std::uint64_t queue_full = 0;
    std::string failed_error;     // non-empty: the hook's thread failed with this
  };

  HookRunner(std::vector<std::string> argv, double timeout_s, std::int64_t max_per_minute,
             std::size_t queue_capacity);
  HookRunner(const HookRunner&) = delete;
  HookRunner& operator=(const HookRunner&) = delete;
  // Stops the thread; a hook still running is stopped as on a timeout.
  ~HookRunner();

  void submit(std::string input);
  Counters counters() const;
  // True once the queue is empty and no run is in progress; false after timeout_s.
  bool wait_idle(double timeout_s);

 private:
  void run_loop();
  void serve();
  void run_one(const std::string& input);

  const std::vector<std::string> argv_;
  const std::chrono::milliseconds timeout_;
  const std::int64_t max_per_minute_;
  const std::size_t capacity_;

  mutable std::mutex mutex_;
  std::condition_variable wake_;
  std::condition_variable idle_;
  std::deque<std::string> queue_;
  std::deque<std::chrono::steady_clock::time_point> accepted_;  // within the last minute
  bool busy_ = false;
  bool stopping_ = false;
  std::atomic<bool> abort_{false};  // the destructor runs: stop a running hook now
  Counters counters_;
  std::thread thread_;
};

}  // namespace lphi::alerts
