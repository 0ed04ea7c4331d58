// One request/reply exchange with lphid on its control socket, bounded by a
// timeout, and what the reply means for the client's exit code.
//
// The control socket (daemon/PROTOCOL.md) answers every JSON request with one
// JSON reply whose "type" is the request's, or {"type":"error","reason",
// "detail"} naming what was wrong.
#pragma once

#include <chrono>
#include <nlohmann/json.hpp>
#include <string>
#include <zmq.hpp>

namespace lphi::client {

struct ControlReply {
  enum class Outcome {
    ok,           // a reply of the request's type: `body`
    unreachable,  // no reply within the timeout
    refused,      // an error reply: `reason`, `detail`
    malformed,    // a reply that is not JSON, or of another type
  };
  Outcome outcome = Outcome::unreachable;
  nlohmann::json body;
  std::string reason;
  std::string detail;
};

// Sends `request` to the ROUTER at `endpoint` and waits at most `timeout`.
ControlReply ask_control(const std::string& endpoint, const nlohmann::json& request,
                         std::chrono::milliseconds timeout);

// The exit code (exit_codes.hpp) for a reply that is not ok, after printing
// one line to stderr naming the request and what went wrong:
//   unreachable -> exit_unreachable; refused with unknown_source (no such
//   sample, no such alert) -> exit_no_data; refused because the request was
//   malformed (missing_field, wrong_type, ...) -> exit_bad_input; an older
//   lphid that does not know the request (unknown_type) and anything else ->
//   exit_failure.
int report_failed_reply(const ControlReply& reply, const std::string& request_type,
                        const std::string& endpoint);

// Connects `socket` (a SUB, before any message is expected) to `endpoint`
// and waits at most `timeout` for ZeroMQ's handshake with the peer to
// succeed (a socket monitor's ZMQ_EVENT_HANDSHAKE_SUCCEEDED). A SUB sends its
// subscriptions right after the handshake, so this is the bounded
// condition that replaces a fixed "slow joiner" pause. False on timeout
// (the socket stays connected and may still join later). Throws
// zmq::error_t when the endpoint is malformed, as connect() does.
bool connect_and_wait_for_handshake(zmq::context_t& context, zmq::socket_t& socket,
                                    const std::string& endpoint, std::chrono::milliseconds timeout);

// Milliseconds for a --timeout-s value (seconds, > 0).
std::chrono::milliseconds timeout_ms(double seconds);

}  // namespace lphi::client
