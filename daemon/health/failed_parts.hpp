// FailedParts: the parts of lphid whose thread ended with an exception, and
// the barrier that puts them there.
//
// Every thread lphid starts runs its body inside run_guarded(): an exception
// that escapes the body is caught there, logged, counted and recorded as
// {"part", "error", "at"}, and the thread ends as that part's failure instead
// of ending lphid through std::terminate. What a failed part means is the
// part's to decide before it returns (a sample's analysis stops with its
// error, the alert hook refuses further changes); the rest of lphid goes on,
// and `lphi status` lists the failure (daemon/PROTOCOL.md, "failed_parts").
//
// Bounded: one entry per part (a part that fails again replaces its entry),
// and at most max_parts parts. Thread safety: every member may be called
// from any thread.
#pragma once

#include <cstdint>
#include <exception>
#include <mutex>
#include <string>
#include <vector>

namespace lphi::health {

struct FailedPart {
  std::string part;   // "sample:film-a", "ingest", "control", "drivers", "alert-hook"
  std::string error;  // what the exception said
  double at_unix = 0.0;
};

class FailedParts {
 public:
  static constexpr std::size_t max_parts = 256;

  // Logs the failure at critical level, counts it and records it.
  void mark(const std::string& part, const std::string& error);
  std::vector<FailedPart> list() const;
  std::uint64_t failures() const;  // every mark() so far

 private:
  mutable std::mutex mutex_;
  std::vector<FailedPart> parts_;
  std::uint64_t failures_ = 0;
};

// Runs body(); an exception leaving it is marked as `part`'s failure in
// `parts` (when not null) and logged. Returns whether body() returned normally.
template <class Body>
bool run_guarded(FailedParts* parts, const std::string& part, Body&& body) noexcept {
  std::string error;
  try {
    body();
    return true;
  } catch (const std::exception& e) {
    error = e.what();
  } catch (...) {
    error = "an exception that is not a std::exception";
  }
  try {
    if (parts != nullptr) {
      parts->mark(part, error);
    } else {
      FailedParts().mark(part, error);  // logged all the same
    }
  } catch (...) {
    // Out of memory while recording: the thread ends all the same.
  }
  return false;
}

}  // namespace lphi::health
