// EventPublisher: lphid's event socket, a ZeroMQ publisher (an XPUB, to
// which ordinary SUB sockets connect) that `lphi watch` and other programs
// subscribe to.
//
// Every message is two frames: the topic ("sweep", "fit", "verdict",
// "alert"), then the body as JSON text. Subscribers filter by topic prefix.
// publish() never blocks: each subscriber has a bounded queue (ZMQ_SNDHWM)
// and a message that does not fit a slow subscriber's queue is dropped (for
// every subscriber) and counted. A message published while nobody listens
// goes nowhere; that is the protocol, not a drop.
//
// Thread safety: publish() and the counters may be called from any thread.
#pragma once

#include <atomic>
#include <cstdint>
#include <memory>
#include <mutex>
#include <string>
#include <string_view>

#include <nlohmann/json.hpp>
#include <zmq.hpp>

#include "daemon/store/database.hpp"

namespace lphi::alerts {

class EventPublisher {
 public:
  // The messages a slow subscriber may have queued before more are dropped.
  static constexpr int send_high_water_mark = 10000;

  // Binds a PUB socket at `endpoint` (ipc://..., tcp://host:port; a tcp
  // port * picks one, see endpoint()).
  static Status create(zmq::context_t& context, const std::string& endpoint,
                              std::unique_ptr<EventPublisher>& out);

  EventPublisher(const EventPublisher&) = delete;
  EventPublisher& operator=(const EventPublisher&) = delete;
  ~EventPublisher();

  void publish(std::string_view topic, const nlohmann::json& body);

  // The endpoint as bound (with the port that was picked).
  const std::string& endpoint() const { return endpoint_; }
  std::uint64_t published() const { return published_.load(); }
  std::uint64_t dropped() const { return dropped_.load(); }

 private:
  EventPublisher(zmq::socket_t socket, std::string endpoint);

  std::mutex mutex_;
  zmq::socket_t socket_;
  std::string endpoint_;
  std::atomic<std::uint64_t> published_{0};
  std::atomic<std::uint64_t> dropped_{0};
};

}  // namespace lphi::alerts
