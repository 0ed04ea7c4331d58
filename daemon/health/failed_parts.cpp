#include "daemon/health/failed_parts.hpp"

#include <algorithm>
#include <chrono>
#include <spdlog/spdlog.h>

namespace lphi::health {

void FailedParts::mark(const std::string& part, const std::string& error) {
  spdlog::critical("{} failed: {}; it stops, lphid goes on", part, error);
  const double now =
      std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
  std::lock_guard lock(mutex_);
  ++failures_;
  auto it = std::find_if(parts_.begin(), parts_.end(), [&](const FailedPart& p) { return p.part == part; });
  if (it != parts_.end()) {
    it->error = error;
    it->at_unix = now;
  } else if (parts_.size() < max_parts) {
    parts_.push_back({part, error, now});
  }
}

std::vector<FailedPart> FailedParts::list() const {
  std::lock_guard lock(mutex_);
  return parts_;
}

std::uint64_t FailedParts::failures() const {
  std::lock_guard lock(mutex_);
  return failures_;
}

}  // namespace lphi::health
