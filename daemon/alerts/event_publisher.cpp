#include "daemon/alerts/event_publisher.hpp"

namespace lphi::alerts {

Status EventPublisher::create(zmq::context_t& context, const std::string& endpoint,
                                     std::unique_ptr<EventPublisher>& out) {
  if (endpoint.empty()) return Status::invalid_input("the event socket has no endpoint");
  try {
    // XPUB with no-drop: a send that would pass a subscriber's high-water
    // mark fails at once (non-blocking) instead of being dropped unseen, so
    // the drop can be counted.
    zmq::socket_t socket(context, zmq::socket_type::xpub);
    socket.set(zmq::sockopt::sndhwm, send_high_water_mark);
    socket.set(zmq::sockopt::linger, 0);
    socket.set(zmq::sockopt::xpub_nodrop, 1);
    socket.bind(endpoint);
    std::string bound = socket.get(zmq::sockopt::last_endpoint);
    out.reset(new EventPublisher(std::move(socket), std::move(bound)));
  } catch (const zmq::error_t& e) {
    return Status::unavailable("cannot bind the event socket at " + endpoint + ": " + e.what());
  }
  return Status::success();
}

EventPublisher::EventPublisher(zmq::socket_t socket, std::string endpoint)
    : socket_(std::move(socket)), endpoint_(std::move(endpoint)) {}

EventPublisher::~EventPublisher() = default;

void EventPublisher::publish(std::string_view topic, const nlohmann::json& body) {
  const std::string text = body.dump(-1, ' ', false, nlohmann::json::error_handler_t::replace);
  std::lock_guard lock(mutex_);
  try {
    // Subscriptions arrive as messages on an XPUB; they are not needed here
    // (the socket filters by itself) but must not pile up.
    zmq::message_t subscription;
    while (socket_.recv(subscription, zmq::recv_flags::dontwait)) {
    }
    if (!socket_.send(zmq::buffer(topic), zmq::send_flags::sndmore | zmq::send_flags::dontwait)) {
      dropped_.fetch_add(1);
      return;
    }
    // ZeroMQ checks the high-water mark at a message's first frame, so the
    // second one is accepted once the first was.
    if (!socket_.send(zmq::buffer(text), zmq::send_flags::dontwait)) {
      dropped_.fetch_add(1);
      return;
    }
    published_.fetch_add(1);
  } catch (const zmq::error_t&) {
    dropped_.fetch_add(1);
  }
}

}  // namespace lphi::alerts
