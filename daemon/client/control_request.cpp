#include "daemon/client/control_request.hpp"

#include <atomic>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <iostream>
#include <zmq.hpp>

#include "daemon/client/exit_codes.hpp"

namespace lphi::client {

using nlohmann::json;

ControlReply ask_control(const std::string& endpoint, const json& request,
                         std::chrono::milliseconds timeout) {
  ControlReply out;
  zmq::context_t context(1);
  zmq::socket_t socket(context, zmq::socket_type::dealer);
  socket.set(zmq::sockopt::linger, 0);
  try {
    socket.connect(endpoint);
  } catch (const zmq::error_t& e) {
    out.outcome = ControlReply::Outcome::unreachable;
    out.detail = std::string("cannot connect: ") + e.what();
    return out;
  }
  const std::string text = request.dump();
  // A DEALER without a peer queues the message; send never blocks here.
  if (!socket.send(zmq::buffer(text), zmq::send_flags::dontwait)) {
    out.outcome = ControlReply::Outcome::unreachable;
    return out;
  }
  zmq::pollitem_t item{socket.handle(), 0, ZMQ_POLLIN, 0};
  zmq::poll(&item, 1, timeout);
  zmq::message_t message;
  if (!(item.revents & ZMQ_POLLIN) || !socket.recv(message, zmq::recv_flags::dontwait)) {
    out.outcome = ControlReply::Outcome::unreachable;
    return out;
  }
  out.body = json::parse(message.to_string_view(), nullptr, false);
  const std::string type = request.value("type", "");
  if (!out.body.is_object()) {
    out.outcome = ControlReply::Outcome::malformed;
    out.detail = "the reply is not a JSON object";
    return out;
  }
  const auto reply_type = out.body.find("type");
  if (reply_type != out.body.end() && reply_type->is_string() && *reply_type == "error") {
    out.outcome = ControlReply::Outcome::refused;
    out.reason = out.body.value("reason", "");
    out.detail = out.body.value("detail", "");
    return out;
  }
  if (reply_type == out.body.end() || !reply_type->is_string() || *reply_type != type) {
    out.outcome = ControlReply::Outcome::malformed;
    out.detail = "the reply's type is not \"" + type + "\"";
    return out;
  }
  out.outcome = ControlReply::Outcome::ok;
  return out;
}

int report_failed_reply(const ControlReply& reply, const std::string& request_type,
                        const std::string& endpoint) {
  switch (reply.outcome) {
    case ControlReply::Outcome::ok:
      return exit_ok;
    case ControlReply::Outcome::unreachable:
      std::cerr << "lphi: lphid does not answer on " << endpoint;
      if (!reply.detail.empty()) std::cerr << " (" << reply.detail << ")";
      std::cerr << "\n";
      return exit_unreachable;
    case ControlReply::Outcome::malformed:
      std::cerr << "lphi: lphid sent an unexpected reply to \"" << request_type << "\": " << reply.detail
                << "\n";
      return exit_failure;
    case ControlReply::Outcome::refused:
      break;
  }
  std::cerr << "lphi: lphid refused \"" << request_type << "\": " << reply.reason;
  if (!reply.detail.empty()) std::cerr << ": " << reply.detail;
  std::cerr << "\n";
  if (reply.reason == "unknown_source") return exit_no_data;
  if (reply.reason == "unknown_type") {
    std::cerr << "lphi: this lphid does not offer \"" << request_type
              << "\" (is it older than this lphi?)\n";
    return exit_failure;
  }
  if (reply.reason == "missing_field" || reply.reason == "wrong_type" || reply.reason == "unknown_field" ||
      reply.reason == "bad_name" || reply.reason == "value_out_of_range") {
    return exit_bad_input;
  }
  return exit_failure;
}

std::chrono::milliseconds timeout_ms(double seconds) {
  return std::chrono::milliseconds(static_cast<long long>(std::ceil(seconds * 1000.0)));
}

bool connect_and_wait_for_handshake(zmq::context_t& context, zmq::socket_t& socket,
                                    const std::string& endpoint, std::chrono::milliseconds timeout) {
  // One inproc name per monitor: several may run in one process (tests).
  static std::atomic<unsigned> monitors{0};
  const std::string address = "inproc://lphi-handshake-" + std::to_string(monitors.fetch_add(1));
  if (zmq_socket_monitor(socket.handle(), address.c_str(), ZMQ_EVENT_HANDSHAKE_SUCCEEDED) != 0) {
    socket.connect(endpoint);
    return false;
  }
  zmq::socket_t monitor(context, zmq::socket_type::pair);
  monitor.set(zmq::sockopt::linger, 0);
  monitor.connect(address);
  socket.connect(endpoint);
  bool joined = false;
  const auto deadline = std::chrono::steady_clock::now() + timeout;
  while (!joined) {
    const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - std::chrono::steady_clock::now());
    if (left.count() <= 0) break;
    zmq::pollitem_t item{monitor.handle(), 0, ZMQ_POLLIN, 0};
    zmq::poll(&item, 1, left);
    zmq::message_t event, peer;
    if (!(item.revents & ZMQ_POLLIN) || !monitor.recv(event, zmq::recv_flags::dontwait)) continue;
    (void)monitor.recv(peer, zmq::recv_flags::dontwait);  // the event's second frame: the endpoint
    std::uint16_t id = 0;
    if (event.size() >= sizeof id) std::memcpy(&id, event.data(), sizeof id);
    joined = id == ZMQ_EVENT_HANDSHAKE_SUCCEEDED;
  }
  zmq_socket_monitor(socket.handle(), nullptr, 0);
  return joined;
}

}  // namespace lphi::client
