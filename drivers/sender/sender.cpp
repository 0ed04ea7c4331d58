#include "drivers/sender/sender.hpp"

#include <chrono>

namespace lphi::drivers {

using Clock = std::chrono::steady_clock;
using nlohmann::json;

namespace {
constexpr std::size_t kept_rejections = 100;
}

Sender::Sender(zmq::context_t& context, SenderOptions options)
    : context_(context), options_(std::move(options)), spool_(protocol::empty_readings(options_.kind)) {
  // Batch ids need only be unique per connection; starting from the clock
  // keeps a restarted sender from reusing the ids of its previous run.
  next_batch_id_ = static_cast<std::uint64_t>(
      std::chrono::duration_cast<std::chrono::microseconds>(
          std::chrono::system_clock::now().time_since_epoch()).count());
  connect();
}

Sender::~Sender() = default;

void Sender::connect() {
  socket_ = std::make_unique<zmq::socket_t>(context_, zmq::socket_type::dealer);
  socket_->set(zmq::sockopt::linger, 0);
  // Queue nothing on a connection that is not up: unsent batches stay ours.
  socket_->set(zmq::sockopt::immediate, 1);
  socket_->set(zmq::sockopt::reconnect_ivl, 50);
  socket_->set(zmq::sockopt::reconnect_ivl_max, 500);
  socket_->connect(options_.endpoint);
}

template <class R>
bool Sender::offer_reading(const R& r) {
  auto* spool = std::get_if<std::vector<R>>(&spool_);
  if (spool == nullptr || spool_full()) return false;
  spool->push_back(r);
  return true;
}

bool Sender::offer(const protocol::LockinReading& r) { return offer_reading(r); }
bool Sender::offer(const protocol::ThermometerReading& r) { return offer_reading(r); }
bool Sender::offer(const protocol::FieldReading& r) { return offer_reading(r); }

std::size_t Sender::unacknowledged() const {
  return protocol::reading_count(spool_) - spool_offset_ + in_flight_readings_;
}

void Sender::fill_window() {
  std::visit(
      [&](auto& spool) {
        using Vec = std::decay_t<decltype(spool)>;
        while (in_flight_.size() < options_.max_batches_in_flight && spool_offset_ < spool.size()) {
          const std::size_t n = std::min(options_.batch_max_readings, spool.size() - spool_offset_);
          const auto first = spool.begin() + static_cast<std::ptrdiff_t>(spool_offset_);
          Vec batch(first, first + static_cast<std::ptrdiff_t>(n));
          spool_offset_ += n;
          const std::uint64_t id = next_batch_id_++;
          InFlight f;
          f.readings = std::move(batch);
          f.frame = protocol::encode_frame(
              protocol::batch_message(id, options_.source, f.readings), options_.encoding);
          in_flight_readings_ += n;
          in_flight_.emplace(id, std::move(f));
        }
        // Compact once most of the spool has been batched.
        if (spool_offset_ > 0 && spool_offset_ * 2 >= spool.size()) {
          spool.erase(spool.begin(), spool.begin() + static_cast<std::ptrdiff_t>(spool_offset_));
          spool_offset_ = 0;
        }
      },
      spool_);
}

void Sender::send_unsent() {
  for (auto& [id, f] : in_flight_) {
    if (f.sent_at) continue;
    try {
      if (!socket_->send(zmq::buffer(f.frame), zmq::send_flags::dontwait)) return;  // not connected yet
    } catch (const zmq::error_t&) {
      return;
    }
    f.sent_at = Clock::now();
  }
}

void Sender::handle_reply(std::string_view payload) {
  json message;
  protocol::Encoding encoding{};
  protocol::Limits limits;
  limits.max_frame_bytes = std::size_t{64} << 20;
  if (protocol::decode_frame(payload, limits, message, encoding)) return;
  protocol::Reply reply;
  if (protocol::read_reply(message, reply)) return;
  if (reply.type == protocol::ReplyType::hello) {
    last_hello_ = reply.hello;
    return;
  }
  const auto batch_id = reply.type == protocol::ReplyType::ack ? reply.ack.batch_id : reply.error.batch_id;
  if (!batch_id) {
    if (reply.type == protocol::ReplyType::error) {
      last_hello_refusal_ = protocol::Refusal{reply.error.reason, reply.error.detail};
    }
    return;
  }
  auto it = in_flight_.find(*batch_id);
  if (it == in_flight_.end()) return;  // an answer to a batch already settled
  if (reply.type == protocol::ReplyType::error) {
    if (protocol::is_retryable(reply.error.reason)) {
      it->second.sent_at.reset();
      ++totals_.resends;
      return;
    }
    // The whole batch is refused: every reading in it counts as rejected.
    const std::size_t n = protocol::reading_count(it->second.readings);
    totals_.rejected += n;
    totals_.rejected_by_reason[reply.error.reason] += n;
    if (totals_.first_rejections.size() < kept_rejections) {
      totals_.first_rejections.push_back({0, std::nullopt, reply.error.reason, reply.error.detail});
    }
  } else {
    totals_.accepted += reply.ack.accepted;
    totals_.duplicates += reply.ack.duplicates;
    totals_.rejected += reply.ack.rejected.size();
    for (const auto& r : reply.ack.rejected) {
      ++totals_.rejected_by_reason[r.reason];
      if (totals_.first_rejections.size() < kept_rejections) totals_.first_rejections.push_back(r);
    }
    if (on_ack) on_ack(it->second.readings, reply.ack);
  }
  in_flight_readings_ -= protocol::reading_count(it->second.readings);
  in_flight_.erase(it);
}

void Sender::receive(std::chrono::milliseconds wait) {
  zmq::pollitem_t item{socket_->handle(), 0, ZMQ_POLLIN, 0};
  try {
    zmq::poll(&item, 1, wait);
  } catch (const zmq::error_t&) {
    return;
  }
  // Bounded: at most a window's worth of replies and a few strays per call.
  for (std::size_t i = 0; i < options_.max_batches_in_flight + 16; ++i) {
    zmq::message_t frame;
    try {
      if (!socket_->recv(frame, zmq::recv_flags::dontwait)) break;
    } catch (const zmq::error_t&) {
      break;
    }
    handle_reply(frame.to_string_view());
  }
}

void Sender::check_timeouts() {
  const auto now = Clock::now();
  bool expired = false;
  for (const auto& [id, f] : in_flight_) {
    if (f.sent_at && now - *f.sent_at > options_.ack_timeout) expired = true;
  }
  if (!expired) return;
  // Start over on a fresh connection and resend everything unacknowledged.
  connect();
  ++totals_.reconnects;
  for (auto& [id, f] : in_flight_) {
    if (f.sent_at) ++totals_.resends;
    f.sent_at.reset();
  }
}

void Sender::pump(std::chrono::milliseconds wait) {
  fill_window();
  send_unsent();
  receive(wait);
  fill_window();
  send_unsent();
  check_timeouts();
}

bool Sender::flush(std::chrono::milliseconds timeout) {
  const auto deadline = Clock::now() + timeout;
  while (unacknowledged() > 0 && Clock::now() < deadline) pump(std::chrono::milliseconds(20));
  return unacknowledged() == 0;
}

std::optional<protocol::HelloReply> Sender::hello(std::chrono::milliseconds timeout,
                                                  std::optional<protocol::Refusal>* refusal) {
  const auto deadline = Clock::now() + timeout;
  last_hello_.reset();
  last_hello_refusal_.reset();
  const std::string frame = protocol::encode_frame(protocol::hello_message(options_.source), options_.encoding);
  while (Clock::now() < deadline) {
    bool sent = false;
    try {
      sent = socket_->send(zmq::buffer(frame), zmq::send_flags::dontwait).has_value();
    } catch (const zmq::error_t&) {
    }
    if (!sent) {
      receive(std::chrono::milliseconds(20));  // not connected yet
      continue;
    }
    const auto asked = Clock::now();
    while (!last_hello_ && !last_hello_refusal_ && Clock::now() < deadline &&
           Clock::now() - asked < options_.ack_timeout) {
      receive(std::chrono::milliseconds(20));
    }
    if (last_hello_) return last_hello_;
    if (last_hello_refusal_) {
      if (refusal != nullptr) *refusal = last_hello_refusal_;
      return std::nullopt;
    }
    connect();
    ++totals_.reconnects;
  }
  return std::nullopt;
}

}  // namespace lphi::drivers
