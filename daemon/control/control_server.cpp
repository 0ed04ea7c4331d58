#include "daemon/control/control_server.hpp"

#include <spdlog/spdlog.h>
#include <sys/eventfd.h>
#include <unistd.h>

#include "daemon/config/data_dir.hpp"
#include "daemon/health/failed_parts.hpp"

namespace lphi::control {

using nlohmann::json;
using protocol::Reason;

namespace {
constexpr int receive_high_water_mark = 64;
constexpr int hard_max_message_bytes = 256 << 20;
constexpr std::size_t outbox_capacity = 4096;
}  // namespace

// The deferred replies waiting for the control thread, and its wake-up.
struct Reply::Outbox {
  std::mutex mutex;
  bool open = true;
  std::vector<std::pair<Reply::Peer, std::string>> replies;  // encoded
  int wake_fd = -1;
  ~Outbox() {
    if (wake_fd >= 0) ::close(wake_fd);
  }
};

Reply::Reply(std::shared_ptr<Outbox> outbox, Peer peer)
    : outbox_(std::move(outbox)), peer_(std::move(peer)), sent_(std::make_shared<std::atomic<bool>>(false)) {}

void Reply::send(const json& message) const {
  if (!outbox_ || sent_->exchange(true)) return;
  std::string payload = protocol::encode_frame(message, peer_.encoding);
  {
    std::lock_guard lock(outbox_->mutex);
    if (!outbox_->open) return;
    if (outbox_->replies.size() >= outbox_capacity) {
      spdlog::warn("control: {} replies wait to be sent; this one is dropped", outbox_capacity);
      return;
    }
    outbox_->replies.emplace_back(peer_, std::move(payload));
  }
  const std::uint64_t one = 1;
  [[maybe_unused]] auto r = ::write(outbox_->wake_fd, &one, sizeof one);
}

ControlServer::ControlServer(zmq::context_t& context, const protocol::Limits& limits)
    : socket_(context, zmq::socket_type::router), limits_(limits), outbox_(std::make_shared<Reply::Outbox>()) {}

ControlServer::~ControlServer() {
  stop();
  std::lock_guard lock(outbox_->mutex);
  outbox_->open = false;
}

Status ControlServer::create(zmq::context_t& context, const std::string& endpoint, const protocol::Limits& limits,
                             std::unique_ptr<ControlServer>& out) {
  std::unique_ptr<ControlServer> s(new ControlServer(context, limits));
  s->outbox_->wake_fd = ::eventfd(0, EFD_NONBLOCK | EFD_CLOEXEC);
  if (s->outbox_->wake_fd < 0) return Status::unavailable("cannot create an eventfd for the control socket");
  try {
    s->socket_.set(zmq::sockopt::linger, 0);
    s->socket_.set(zmq::sockopt::rcvhwm, receive_high_water_mark);
    s->socket_.set(zmq::sockopt::maxmsgsize, std::int64_t{hard_max_message_bytes});
    if (auto e = config::prepare_ipc_endpoint(endpoint)) return Status::unavailable(*e);
    s->socket_.bind(endpoint);
    if (auto e = config::restrict_ipc_endpoint(endpoint)) return Status::unavailable(*e);
  } catch (const zmq::error_t& e) {
    return Status::unavailable(std::string("cannot bind the control socket: ") + e.what());
  }
  out = std::move(s);
  return Status::success();
}

void ControlServer::add_handler(std::string type, Handler handler) {
  handlers_[std::move(type)] = [h = std::move(handler)](const json& request, Reply reply) {
    reply.send(h(request));
  };
}

void ControlServer::add_deferred_handler(std::string type, DeferredHandler handler) {
  handlers_[std::move(type)] = std::move(handler);
}

void ControlServer::start(health::FailedParts* failed_parts) {
  if (thread_.joinable()) return;
  failed_parts_ = failed_parts;
  thread_ = std::thread([this] { run(); });
}

void ControlServer::stop() {
  stopping_.store(true);
  if (thread_.joinable()) thread_.join();
}

// The thread's entry: the exception barrier around the loop.
void ControlServer::run() {
  if (!health::run_guarded(failed_parts_, "control", [this] { serve(); })) {
    spdlog::error("the control socket is no longer served; lphid still ingests");
  }
}

void ControlServer::serve() {
  while (!stopping_.load()) {
    zmq::pollitem_t items[] = {
        {socket_.handle(), 0, ZMQ_POLLIN, 0},
        {nullptr, outbox_->wake_fd, ZMQ_POLLIN, 0},
    };
    try {
      zmq::poll(items, 2, std::chrono::milliseconds(100));
    } catch (const zmq::error_t& e) {
      if (e.num() == EINTR) continue;
      throw;
    }
    if (items[1].revents & ZMQ_POLLIN) {
      std::uint64_t n = 0;
      [[maybe_unused]] auto r = ::read(outbox_->wake_fd, &n, sizeof n);
    }
    // Bounded work per wake-up, so that deferred replies are not starved.
    for (int i = 0; i < 16 && (socket_.get(zmq::sockopt::events) & ZMQ_POLLIN); ++i) on_message();
    send_outbox();
  }
}

void ControlServer::on_message() {
  std::vector<zmq::message_t> frames;
  while (true) {
    zmq::message_t frame;
    if (!socket_.recv(frame, zmq::recv_flags::dontwait)) break;
    const bool more = frame.more();
    if (frames.size() < 8) frames.push_back(std::move(frame));
    if (!more) break;
  }
  if (frames.size() < 2) return;
  Reply::Peer peer;
  peer.identity = frames[0].to_string();
  peer.delimiter = frames.size() == 3 && frames[1].size() == 0;
  const auto payload = frames.back().to_string_view();
  json request;
  protocol::Limits limits = limits_;
  if (auto bad = protocol::decode_frame(payload, limits, request, peer.encoding)) {
    return send(peer, protocol::error_message({std::nullopt, bad->reason, bad->detail}));
  }
  dispatch(peer, request);
}

void ControlServer::dispatch(const Reply::Peer& peer, const json& request) {
  auto type = request.find("type");
  const std::string name = type != request.end() && type->is_string() ? type->get<std::string>() : "";
  auto handler = handlers_.find(name);
  if (handler == handlers_.end()) {
    std::string known;
    for (const auto& [t, h] : handlers_) known += (known.empty() ? "" : ", ") + t;
    return send(peer, protocol::error_message({std::nullopt, Reason::unknown_type,
                                               "the control socket answers the types " + known}));
  }
  Reply reply(outbox_, peer);
  try {
    handler->second(request, reply);
  } catch (const std::exception& e) {
    spdlog::error("control request \"{}\" failed: {}", name, e.what());
    reply.send(protocol::error_message(
        {std::nullopt, Reason::storage_error, "the " + name + " request failed: " + e.what()}));
  } catch (...) {
    spdlog::error("control request \"{}\" failed with an exception that is not a std::exception", name);
    reply.send(protocol::error_message({std::nullopt, Reason::storage_error, "the " + name + " request failed"}));
  }
}

void ControlServer::send_outbox() {
  std::vector<std::pair<Reply::Peer, std::string>> ready;
  {
    std::lock_guard lock(outbox_->mutex);
    ready.swap(outbox_->replies);
  }
  for (const auto& [peer, payload] : ready) {
    try {
      socket_.send(zmq::buffer(peer.identity), zmq::send_flags::sndmore | zmq::send_flags::dontwait);
      if (peer.delimiter) socket_.send(zmq::message_t(), zmq::send_flags::sndmore | zmq::send_flags::dontwait);
      socket_.send(zmq::buffer(payload), zmq::send_flags::dontwait);
    } catch (const zmq::error_t& e) {
      spdlog::debug("a control reply could not be sent: {}", e.what());
    }
  }
}

void ControlServer::send(const Reply::Peer& peer, const json& message) {
  Reply(outbox_, peer).send(message);
}

}  // namespace lphi::control
