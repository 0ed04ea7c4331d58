// The configuration of lphi's instrument drivers, as plain structs.
//
// lphid fills these from its TOML config; nothing here parses files. Every
// field has a default that works for a bench instrument on the lab network,
// and validate() names the first field that is wrong, so a bad config is
// refused with a message before any socket is opened. DRIVERS.md lists every
// field with its default and meaning.
//
// What an instrument says is configuration, not code: a query string and, for
// each comma-separated field of the reply (or each column of a CSV line, or
// each key of a JSON line), the quantity it carries and a scale factor that
// turns the instrument's unit into lphi's SI unit.
#pragma once

#include <chrono>
#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "schema/protocol/reading.hpp"

namespace lphi::drivers {

// Where to connect (or listen) and how lines are framed.
struct ConnectionOptions {
  std::string host = "127.0.0.1";
  std::uint16_t port = 0;
  std::chrono::milliseconds connect_timeout{2000};  // resolve + TCP connect
  std::string terminator = "\n";                    // "\n" or "\r\n" (any 1-4 bytes)
  std::size_t max_line_bytes = 4096;                // longer lines are a counted fault
};

// Reconnect delay after a failed or lost connection: the n-th consecutive
// failure waits min(max_delay, min_delay * factor^(n-1)), shortened by a
// random fraction of at most `jitter` so that instruments that failed together
// do not all come back at the same instant.
struct BackoffOptions {
  std::chrono::milliseconds min_delay{250};
  std::chrono::milliseconds max_delay{30000};
  double factor = 2.0;
  double jitter = 0.5;  // in [0, 1]
  // Seed of the jitter's generator. Nothing: derived from the source name, so
  // every driver has its own sequence and a run is reproducible.
  std::optional<std::uint64_t> seed;
};

// How readings leave the driver (see ReadingOutlet).
struct OutletOptions {
  std::int64_t first_seq = 1;                // the daemon passes the store's next_seq
  std::size_t max_buffered_readings = 10000; // kept while the sink refuses
  std::size_t max_batch_readings = 500;      // readings per sink call
  std::chrono::milliseconds sink_retry_interval{100};
};

// One field of a reply or line and the quantity it carries.
//
// Quantities (SI units after scaling):
//   lock-in:     x_v, y_v (both required), frequency_hz, range_v,
//                time_constant_s, overload (boolean)
//   thermometer: temperature_k (required), resistance_ohm
//   field:       field_t (required)
//   every kind:  time_s -- the instrument's own time of the reading, seconds
//                since the Unix epoch; without it the reading's time is the
//                arrival time of the reply (system clock).
// A boolean accepts 1/0, ON/OFF, TRUE/FALSE (any case) or a JSON boolean.
struct FieldMap {
  std::size_t index = 0;  // comma-separated field of a SCPI reply / CSV column (from 0)
  std::string key;        // JSON key (line-stream with format json)
  std::string quantity;
  double scale = 1.0;     // value in SI = scale * value as sent
};

struct ScpiQuery {
  std::string send;  // e.g. "MEAS:XY?" (the terminator is appended)
  std::vector<FieldMap> fields;
};

// scpi-tcp: polls over a raw TCP socket. On connect the driver asks
// identity_query and reports the answer; then every poll_interval it sends the
// queries in order, one reply line per query, and the fields of all replies
// of one poll make one reading.
struct ScpiTcpConfig {
  std::string source;
  protocol::SourceKind kind = protocol::SourceKind::lockin;
  ConnectionOptions connection;
  BackoffOptions backoff;
  OutletOptions outlet;
  std::chrono::milliseconds poll_interval{1000};
  std::chrono::milliseconds reply_timeout{1000};  // per query, from send to terminator
  std::chrono::milliseconds stall_after{5000};    // connected but no reading for this long
  std::string identity_query = "*IDN?";           // empty: do not ask
  std::vector<ScpiQuery> queries;
};

// line-stream: the instrument (or a gateway) pushes one reading per line.
struct LineStreamConfig {
  enum class Mode { connect, listen };
  enum class Format { csv, json };

  std::string source;
  protocol::SourceKind kind = protocol::SourceKind::lockin;
  Mode mode = Mode::connect;        // listen: bind connection.host:port, one peer at a time
  Format format = Format::csv;
  char csv_delimiter = ',';
  ConnectionOptions connection;
  BackoffOptions backoff;
  OutletOptions outlet;
  std::vector<FieldMap> fields;     // index for csv, key for json
  std::chrono::milliseconds silence_timeout{10000};  // no line for this long: reconnect
  std::chrono::milliseconds stall_after{3000};       // no reading for this long: stalled
};

// Empty when the config is usable, else what is wrong (naming the source and
// the field).
std::string validate(const ScpiTcpConfig& config);
std::string validate(const LineStreamConfig& config);

}  // namespace lphi::drivers
