// ReadingOutlet: numbers a driver's readings and hands them to the sink.
//
// Every reading made gets the next sequence number of its source, starting
// from OutletOptions::first_seq (lphid passes the store's next_seq), so
// sequence numbers are contiguous and monotonic.
//
// The sink is offered batches of up to max_batch_readings, oldest first. It
// is given a copy: when it returns false (back-pressure) nothing was handed
// over and the same readings are offered again later, so a sink may refuse
// freely and a reading it accepted is never offered twice. While the sink
// refuses, readings wait in a buffer of at most max_buffered_readings. At
// that limit a new reading is dropped and counted (dropped_readings); it has
// used its sequence number, so the store sees a gap where the reading would
// have been -- the loss is recorded, never silent -- and memory stays bounded.
// Not thread-safe: used on its driver's strand.
#pragma once

#include <cstdint>
#include <functional>

#include "schema/protocol/reading.hpp"
#include "drivers/instrument/driver_config.hpp"
#include "drivers/instrument/quantities.hpp"

namespace lphi::drivers {

using ReadingSink = std::function<bool(protocol::Readings&&)>;

class ReadingOutlet {
 public:
  ReadingOutlet(protocol::SourceKind kind, const OutletOptions& options, ReadingSink sink);

  // Numbers the reading, buffers it (or drops it at the limit), and offers
  // the buffer. False when the reading was dropped.
  bool push(Reading reading);
  // Offers the buffered readings; true when none are left.
  bool drain();

  std::size_t buffered() const { return protocol::reading_count(buffer_); }
  std::int64_t next_seq() const { return next_seq_; }
  std::uint64_t made() const { return made_; }
  std::uint64_t delivered() const { return delivered_; }
  std::uint64_t dropped() const { return dropped_; }
  std::uint64_t refusals() const { return refusals_; }

 private:
  OutletOptions options_;
  ReadingSink sink_;
  protocol::Readings buffer_;
  std::int64_t next_seq_;
  std::uint64_t made_ = 0;
  std::uint64_t delivered_ = 0;
  std::uint64_t dropped_ = 0;
  std::uint64_t refusals_ = 0;
};

}  // namespace lphi::drivers
