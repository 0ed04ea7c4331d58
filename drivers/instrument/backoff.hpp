// Backoff: the delay before the next connection attempt.
//
// The n-th consecutive failure waits d_n = min(max_delay, min_delay *
// factor^(n-1)), then a uniformly random fraction of at most `jitter` of d_n
// is taken off (so the delay lies in [(1 - jitter) d_n, d_n], never above
// max_delay). The generator is seeded, so a run is reproducible. succeeded()
// starts the sequence again.
#pragma once

#include <chrono>
#include <cstdint>
#include <random>

#include "drivers/instrument/driver_config.hpp"

namespace lphi::drivers {

class Backoff {
 public:
  Backoff(const BackoffOptions& options, std::uint64_t seed);
  std::chrono::milliseconds next_delay();
  void succeeded() { failures_ = 0; }
  unsigned failures() const { return failures_; }

 private:
  BackoffOptions options_;
  std::mt19937_64 generator_;
  unsigned failures_ = 0;
};

// A stable 64-bit hash (FNV-1a) of a source name, the default jitter seed.
std::uint64_t seed_from_name(std::string_view name);

}  // namespace lphi::drivers
