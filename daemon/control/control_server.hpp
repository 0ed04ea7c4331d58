// ControlServer: lphid's control socket (ZeroMQ ROUTER; JSON or MessagePack
// request/reply, daemon/PROTOCOL.md) and the registry of its request
// handlers.
//
// A request is decoded (its encoding is remembered for the reply), routed by
// its "type" to the handler registered for it, and the handler's answer is
// encoded as the request was. A request that cannot be read, or names no
// registered type, is answered with a protocol error naming what was wrong.
// An exception a handler throws becomes an error reply and a log line; the
// server goes on.
//
// Replies may come later: a deferred handler gets a Reply, a token that
// keeps the requester's identity and encoding, and may send it from any
// thread, once, when it has the answer (for example an acknowledgement
// after a commit). Deferred replies are handed to the control thread through
// a mutex-guarded outbox and an eventfd; a Reply never sent is never
// answered (the client times out). A Reply that outlives the server is
// harmless: send() then does nothing.
//
// Threading: the server runs on a thread of its own (start/stop), not on
// the ingest thread's poll loop, so that a slow query (a long fits list
// from a large database) never delays an acknowledgement: ingest and control
// share no state but the typed status snapshot the ingest server hands out.
// Handlers therefore run on the control thread and must be safe to call
// there, one at a time. The thread is guarded (health/failed_parts.hpp): an
// exception that escapes the loop itself marks "control" failed.
#pragma once

#include <atomic>
#include <functional>
#include <map>
#include <memory>
#include <mutex>
#include <nlohmann/json.hpp>
#include <string>
#include <thread>
#include <vector>
#include <zmq.hpp>

#include "schema/protocol/codec.hpp"
#include "schema/status.hpp"

namespace lphi::health {
class FailedParts;
}  // namespace lphi::health

namespace lphi::control {

class ControlServer;

// Where a reply goes: the requester's identity and encoding. Copyable; send()
// from any thread, the first call wins.
class Reply {
 public:
  Reply() = default;
  void send(const nlohmann::json& message) const;
  bool valid() const { return outbox_ != nullptr; }

 private:
  friend class ControlServer;
  struct Outbox;
  struct Peer {
    std::string identity;
    bool delimiter = false;  // a REQ peer: replies need an empty frame
    protocol::Encoding encoding = protocol::Encoding::json;
  };
  Reply(std::shared_ptr<Outbox> outbox, Peer peer);
  std::shared_ptr<Outbox> outbox_;
  Peer peer_;
  std::shared_ptr<std::atomic<bool>> sent_;
};

class ControlServer {
 public:
  using Handler = std::function<nlohmann::json(const nlohmann::json& request)>;
  using DeferredHandler = std::function<void(const nlohmann::json& request, Reply reply)>;

  // Binds the socket at `endpoint`; `limits` bound a request's size.
  static Status create(zmq::context_t& context, const std::string& endpoint, const protocol::Limits& limits,
                       std::unique_ptr<ControlServer>& out);
  ~ControlServer();
  ControlServer(const ControlServer&) = delete;
  ControlServer& operator=(const ControlServer&) = delete;

  // Before start(): answers requests of `type` with what `handler` returns.
  void add_handler(std::string type, Handler handler);
  // Before start(): `handler` answers through the Reply, now or later.
  void add_deferred_handler(std::string type, DeferredHandler handler);

  // Starts the control thread; stop() ends it (also the destructor).
  void start(health::FailedParts* failed_parts);
  void stop();

 private:
  ControlServer(zmq::context_t& context, const protocol::Limits& limits);
  void run();
  void serve();
  void on_message();
  void dispatch(const Reply::Peer& peer, const nlohmann::json& request);
  void send_outbox();
  void send(const Reply::Peer& peer, const nlohmann::json& message);

  zmq::socket_t socket_;
  protocol::Limits limits_;
  std::shared_ptr<Reply::Outbox> outbox_;
  std::map<std::string, DeferredHandler> handlers_;
  health::FailedParts* failed_parts_ = nullptr;
  std::atomic<bool> stopping_{false};
  std::thread thread_;
};

}  // namespace lphi::control
