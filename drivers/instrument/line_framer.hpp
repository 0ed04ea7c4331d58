// LineFramer: cuts a byte stream into lines at a terminator, with a bound.
//
// Bytes are fed as they arrive; complete lines come out without their
// terminator. A line longer than max_line_bytes is discarded up to its
// terminator and counted, so an instrument that never sends a terminator
// costs at most max_line_bytes (+ one read) of memory. Not thread-safe; one
// framer per connection.
#pragma once

#include <cstddef>
#include <cstdint>
#include <deque>
#include <optional>
#include <string>
#include <string_view>

namespace lphi::drivers {

class LineFramer {
 public:
  LineFramer(std::string terminator, std::size_t max_line_bytes);

  void feed(std::string_view bytes);
  std::optional<std::string> next_line();
  bool has_line() const { return !lines_.empty(); }
  // Bytes of a line begun but not terminated (0 while discarding an over-long one).
  std::size_t partial_bytes() const { return discarding_ ? 0 : pending_.size(); }
  // Over-long lines discarded since the last call.
  std::uint64_t take_overlong();
  void reset();

 private:
  std::string terminator_;
  std::size_t max_line_bytes_;
  std::string pending_;
  std::deque<std::string> lines_;
  bool discarding_ = false;
  std::uint64_t overlong_ = 0;
};

}  // namespace lphi::drivers
