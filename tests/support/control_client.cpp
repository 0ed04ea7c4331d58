#include "tests/support/control_client.hpp"

namespace lphi::testing {

nlohmann::json request_reply(zmq::socket_t& socket, const nlohmann::json& request,
                             std::chrono::milliseconds timeout) {
  const std::string text = request.dump();
  socket.send(zmq::buffer(text), zmq::send_flags::none);
  zmq::pollitem_t item{socket.handle(), 0, ZMQ_POLLIN, 0};
  zmq::poll(&item, 1, timeout);
  zmq::message_t reply;
  if (!(item.revents & ZMQ_POLLIN) || !socket.recv(reply, zmq::recv_flags::dontwait)) return nullptr;
  return nlohmann::json::parse(reply.to_string_view(), nullptr, false);
}

zmq::socket_t control_client(zmq::context_t& context, const std::string& endpoint) {
  zmq::socket_t s(context, zmq::socket_type::dealer);
  s.set(zmq::sockopt::linger, 0);
  s.connect(endpoint);
  return s;
}

}  // namespace lphi::testing
