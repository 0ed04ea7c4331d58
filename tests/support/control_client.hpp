// One request and its reply on a ZeroMQ DEALER socket connected to a control
// endpoint (lphid's, or a ControlServer's in process), for tests. The wait is
// bounded: null after the timeout or for a reply that is not JSON.
#pragma once

#include <chrono>
#include <nlohmann/json.hpp>
#include <string>
#include <zmq.hpp>

namespace lphi::testing {

nlohmann::json request_reply(zmq::socket_t& socket, const nlohmann::json& request,
                             std::chrono::milliseconds timeout = std::chrono::milliseconds(5000));

// A DEALER socket with linger 0, connected to `endpoint`.
zmq::socket_t control_client(zmq::context_t& context, const std::string& endpoint);

}  // namespace lphi::testing
