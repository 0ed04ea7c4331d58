// Status: lphi's one error type. An operation that can fail returns a Status;
// the caller must look at it ([[nodiscard]]). Callers branch on the code,
// never on the message: the message is for people (it names what failed and
// where) and may be reworded at any time.
//
// Exceptions do not cross module boundaries: a thread's entry point catches
// what escapes and turns it into Status::internal (see daemon/health).
#pragma once

#include <cstdint>
#include <string>
#include <string_view>
#include <utility>

namespace lphi {

enum class StatusCode : std::uint8_t {
  ok = 0,
  invalid_input,  // refused: bad input from outside (a file, an option, a request, a config)
  not_found,      // what was asked for does not exist (an alert id, a sample, a file)
  conflict,       // refused in the current state (already cleared, stored as another kind)
  unavailable,    // not possible now: the writer is stopping, a socket cannot bind, lphid is down
  storage,        // the database failed (I/O error, disk full, locked, corrupt)
  io,             // a file or a socket could not be read or written
  internal,       // a broken invariant, or an exception caught at a thread's entry point
};

// The code's name as the protocol and the logs spell it ("invalid_input", ...).
std::string_view status_code_name(StatusCode code);

class [[nodiscard]] Status {
 public:
  Status() = default;  // success

  static Status success() { return {}; }
  static Status error(StatusCode code, std::string message) {
    return Status(code == StatusCode::ok ? StatusCode::internal : code, std::move(message));
  }
  static Status invalid_input(std::string message) {
    return {StatusCode::invalid_input, std::move(message)};
  }
  static Status not_found(std::string message) { return {StatusCode::not_found, std::move(message)}; }
  static Status conflict(std::string message) { return {StatusCode::conflict, std::move(message)}; }
  static Status unavailable(std::string message) {
    return {StatusCode::unavailable, std::move(message)};
  }
  static Status storage(std::string message) { return {StatusCode::storage, std::move(message)}; }
  static Status io(std::string message) { return {StatusCode::io, std::move(message)}; }
  static Status internal(std::string message) { return {StatusCode::internal, std::move(message)}; }

  bool ok() const { return code_ == StatusCode::ok; }
  explicit operator bool() const { return ok(); }
  StatusCode code() const { return code_; }
  const std::string& message() const { return message_; }

  // The same failure with "what: " before its message (success stays success).
  Status prefixed(std::string_view what) const {
    if (ok()) return *this;
    return {code_, std::string(what) + ": " + message_};
  }

 private:
  Status(StatusCode code, std::string message) : code_(code), message_(std::move(message)) {}

  StatusCode code_ = StatusCode::ok;
  std::string message_;
};

}  // namespace lphi
