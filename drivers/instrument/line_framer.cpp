#include "drivers/instrument/line_framer.hpp"

#include <utility>

namespace lphi::drivers {

LineFramer::LineFramer(std::string terminator, std::size_t max_line_bytes)
    : terminator_(std::move(terminator)), max_line_bytes_(max_line_bytes) {}

void LineFramer::feed(std::string_view bytes) {
  pending_.append(bytes);
  // A terminator may be split across two reads, so the scan starts far enough
  // back to see it whole.
  while (true) {
    const std::size_t pos = pending_.find(terminator_);
    if (pos == std::string::npos) break;
    if (discarding_) {
      discarding_ = false;  // the over-long line ends here; already counted
    } else if (pos > max_line_bytes_) {
      ++overlong_;
    } else {
      lines_.emplace_back(pending_, 0, pos);
    }
    pending_.erase(0, pos + terminator_.size());
  }
  if (!discarding_ && pending_.size() > max_line_bytes_ + terminator_.size() - 1) {
    ++overlong_;
    discarding_ = true;
  }
  if (discarding_) {
    // Keep only what could be the start of a split terminator.
    const std::size_t keep = terminator_.size() - 1;
    if (pending_.size() > keep) pending_.erase(0, pending_.size() - keep);
  }
}

std::optional<std::string> LineFramer::next_line() {
  if (lines_.empty()) return std::nullopt;
  std::string line = std::move(lines_.front());
  lines_.pop_front();
  return line;
}

std::uint64_t LineFramer::take_overlong() { return std::exchange(overlong_, 0); }

void LineFramer::reset() {
  pending_.clear();
  lines_.clear();
  discarding_ = false;
}

}  // namespace lphi::drivers
