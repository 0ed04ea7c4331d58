// Sender: the sender side of lphid's ingest protocol, written once for every
// program that pushes readings (lphi send, the drivers, lab tools).
//
// Readings are offered to a bounded spool, sent in batches over a ZeroMQ
// DEALER socket, and kept until lphid acknowledges them -- which it does only
// after they are committed. A batch without a reply within ack_timeout is
// resent on a fresh connection (libzmq may lose messages queued on a
// connection that went away, so the socket is rebuilt rather than trusted); a
// batch refused for a transient reason (storage_error, shutting_down) is
// resent too. Resending is safe: (source, seq) is unique in the store, so a
// reading that arrives twice is counted as a duplicate, never stored twice.
//
// The Sender runs no thread of its own: the owner calls pump() (or flush())
// regularly. One Sender is used by one thread.
#pragma once

#include <chrono>
#include <cstdint>
#include <functional>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <vector>
#include <zmq.hpp>

#include "schema/protocol/codec.hpp"
#include "schema/protocol/reading.hpp"

namespace lphi::drivers {

struct SenderOptions {
  std::string endpoint;  // e.g. ipc://DIR/ingest.sock
  std::string source;
  protocol::SourceKind kind = protocol::SourceKind::lockin;
  protocol::Encoding encoding = protocol::Encoding::msgpack;
  std::size_t spool_max_readings = 200000;  // spooled + in flight
  std::size_t batch_max_readings = 2000;
  std::size_t max_batches_in_flight = 8;
  std::chrono::milliseconds ack_timeout{3000};
};

struct SenderTotals {
  std::uint64_t accepted = 0;
  std::uint64_t duplicates = 0;
  std::uint64_t rejected = 0;
  std::uint64_t resends = 0;
  std::uint64_t reconnects = 0;
  std::map<protocol::Reason, std::uint64_t> rejected_by_reason;
  std::vector<protocol::RejectedReading> first_rejections;  // the first 100, for messages
};

class Sender {
 public:
  Sender(zmq::context_t& context, SenderOptions options);
  ~Sender();
  Sender(const Sender&) = delete;
  Sender& operator=(const Sender&) = delete;

  // Asks lphid for the source's kind and the next free seq. Retries (and
  // reconnects) until `timeout`; nothing when lphid did not answer, and a
  // refusal when it answered with an error (an unknown source, ...).
  std::optional<protocol::HelloReply> hello(std::chrono::milliseconds timeout,
                                            std::optional<protocol::Refusal>* refusal = nullptr);

  // Spools one reading of the sender's kind. False when the spool is full:
  // call pump() and offer it again.
  bool offer(const protocol::LockinReading& r);
  bool offer(const protocol::ThermometerReading& r);
  bool offer(const protocol::FieldReading& r);

  // Sends what the window allows, reads replies for at most `wait`, resends
  // what timed out.
  void pump(std::chrono::milliseconds wait);
  // Pumps until nothing is unacknowledged or `timeout` passes; true when done.
  bool flush(std::chrono::milliseconds timeout);

  std::size_t unacknowledged() const;  // spooled + in flight
  bool spool_full() const { return unacknowledged() >= options_.spool_max_readings; }
  const SenderTotals& totals() const { return totals_; }

  // Called for every acknowledged batch with its readings (for tools and tests
  // that want to know exactly what is durable).
  std::function<void(const protocol::Readings& batch, const protocol::Ack& ack)> on_ack;

 private:
  struct InFlight {
    protocol::Readings readings;
    std::string frame;
    std::optional<std::chrono::steady_clock::time_point> sent_at;  // nothing: to be sent
  };
  template <class R>
  bool offer_reading(const R& r);
  void connect();
  void fill_window();
  void send_unsent();
  void receive(std::chrono::milliseconds wait);
  void handle_reply(std::string_view payload);
  void check_timeouts();

  zmq::context_t& context_;
  SenderOptions options_;
  std::unique_ptr<zmq::socket_t> socket_;
  protocol::Readings spool_;
  std::size_t spool_offset_ = 0;  // readings before this are already batched
  std::map<std::uint64_t, InFlight> in_flight_;
  std::size_t in_flight_readings_ = 0;
  std::uint64_t next_batch_id_ = 1;
  std::optional<protocol::HelloReply> last_hello_;
  std::optional<protocol::Refusal> last_hello_refusal_;
  SenderTotals totals_;
};

}  // namespace lphi::drivers
