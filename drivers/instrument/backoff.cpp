#include "drivers/instrument/backoff.hpp"

#include <algorithm>
#include <cmath>

namespace lphi::drivers {

Backoff::Backoff(const BackoffOptions& options, std::uint64_t seed)
    : options_(options), generator_(seed) {}

std::chrono::milliseconds Backoff::next_delay() {
  ++failures_;
  const double min_ms = static_cast<double>(options_.min_delay.count());
  const double max_ms = static_cast<double>(options_.max_delay.count());
  // Capping the exponent keeps factor^n finite for a driver that fails for weeks.
  const double exponent = std::min(static_cast<double>(failures_ - 1), 64.0);
  const double full = std::min(max_ms, min_ms * std::pow(options_.factor, exponent));
  std::uniform_real_distribution<double> fraction(0.0, options_.jitter);
  const double delay = full * (1.0 - fraction(generator_));
  return std::chrono::milliseconds(static_cast<std::int64_t>(std::llround(delay)));
}

std::uint64_t seed_from_name(std::string_view name) {
  // FNV-1a, 64-bit offset basis and prime (published by Fowler, Noll and Vo).
  std::uint64_t h = 14695981039346656037ULL;
  for (const char c : name) {
    h ^= static_cast<unsigned char>(c);
    h *= 1099511628211ULL;
  }
  return h;
}

}  // namespace lphi::drivers
