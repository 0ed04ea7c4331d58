// The state and counters of one instrument driver, as a snapshot.
//
// A driver keeps these up to date on its own strand; status() copies them out
// under a lock, so lphid's control thread can show them (`lphi status`) at any
// time without touching the driver's I/O.
#pragma once

#include <chrono>
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>

#include "schema/protocol/reading.hpp"

namespace lphi::drivers {

enum class DriverState {
  stopped,     // not started, or stopped
  connecting,  // resolving / connecting (or, listening, waiting for a peer)
  connected,   // connection up, readings arriving
  stalled,     // connection up, but no reading for longer than stall_after
  backoff,     // connection lost or refused; waiting before the next attempt
};

std::string_view state_name(DriverState state);

// One counter per kind of fault, so a log of `lphi status` tells what went wrong.
struct FaultCounters {
  std::uint64_t connect_failures = 0;  // refused, unreachable, name not resolved
  std::uint64_t connect_timeouts = 0;
  std::uint64_t reply_timeouts = 0;    // nothing at all within the timeout
  std::uint64_t garbage_replies = 0;   // a line that does not parse as configured
  std::uint64_t partial_lines = 0;     // a line cut by a timeout or a disconnect
  std::uint64_t overlong_lines = 0;    // longer than max_line_bytes, discarded
  std::uint64_t disconnects = 0;       // peer closed or reset the connection
  std::uint64_t reconnects = 0;        // connections made after the first
  bool operator==(const FaultCounters&) const = default;
};

struct DriverStatus {
  std::string source;
  protocol::SourceKind kind = protocol::SourceKind::lockin;
  DriverState state = DriverState::stopped;
  std::string identity;    // the last *IDN? answer (scpi-tcp)
  std::string last_error;  // the last fault, in words
  std::optional<std::chrono::system_clock::time_point> last_reading_at;  // arrival time
  std::optional<std::chrono::system_clock::time_point> connected_since;
  FaultCounters faults;
  std::uint64_t bytes_received = 0;
  std::uint64_t bytes_sent = 0;
  std::uint64_t polls = 0;             // scpi-tcp: polls started
  std::uint64_t missed_polls = 0;      // scpi-tcp: ticks skipped because a poll overran
  std::uint64_t skipped_lines = 0;     // line-stream: blank lines and '#' comments
  std::uint64_t readings = 0;          // readings made (sequence numbers used)
  std::uint64_t delivered = 0;         // readings the sink accepted
  std::uint64_t dropped_readings = 0;  // made while the buffer was full, discarded
  std::uint64_t sink_refusals = 0;
  std::size_t buffered = 0;            // made, not yet accepted by the sink
  std::int64_t next_seq = 0;
};

}  // namespace lphi::drivers
