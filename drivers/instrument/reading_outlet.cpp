#include "drivers/instrument/reading_outlet.hpp"

#include <algorithm>
#include <utility>

namespace lphi::drivers {

ReadingOutlet::ReadingOutlet(protocol::SourceKind kind, const OutletOptions& options,
                             ReadingSink sink)
    : options_(options),
      sink_(std::move(sink)),
      buffer_(protocol::empty_readings(kind)),
      next_seq_(options.first_seq) {}

bool ReadingOutlet::push(Reading reading) {
  const std::int64_t seq = next_seq_++;
  ++made_;
  // The sink may take readings again by now: make room before judging.
  if (buffered() >= options_.max_buffered_readings && !drain() &&
      buffered() >= options_.max_buffered_readings) {
    ++dropped_;
    return false;
  }
  std::visit(
      [&](auto& buffer) {
        using R = typename std::decay_t<decltype(buffer)>::value_type;
        // The outlet is built for the driver's kind, so the reading matches.
        if (auto* r = std::get_if<R>(&reading)) {
          r->seq = seq;
          buffer.push_back(std::move(*r));
        }
      },
      buffer_);
  drain();
  return true;
}

bool ReadingOutlet::drain() {
  while (buffered() > 0) {
    const std::size_t n = std::min(buffered(), options_.max_batch_readings);
    protocol::Readings batch = std::visit(
        [&](const auto& buffer) -> protocol::Readings {
          using V = std::decay_t<decltype(buffer)>;
          return V(buffer.begin(), buffer.begin() + static_cast<std::ptrdiff_t>(n));
        },
        buffer_);
    if (!sink_(std::move(batch))) {
      ++refusals_;
      return false;
    }
    std::visit(
        [&](auto& buffer) { buffer.erase(buffer.begin(), buffer.begin() + static_cast<std::ptrdiff_t>(n)); },
        buffer_);
    delivered_ += n;
  }
  return true;
}

}  // namespace lphi::drivers
