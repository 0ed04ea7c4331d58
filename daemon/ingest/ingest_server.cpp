#include "daemon/ingest/ingest_server.hpp"

#include <spdlog/spdlog.h>
#include <sys/eventfd.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <thread>


namespace lphi::ingest {

using nlohmann::json;
using protocol::Reason;

namespace {

double unix_now() {
  return std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
}

// Warnings about refused input are limited so that a hostile sender cannot
// flood the log; the counters keep the full story.
class LogLimiter {
 public:
  bool allow(double now) {
    if (now - window_start_ >= 1.0) {
      window_start_ = now;
      if (suppressed_ > 0) spdlog::warn("{} more refusals in the last second were not logged", suppressed_);
      in_window_ = 0;
      suppressed_ = 0;
    }
    if (in_window_ < 10) {
      ++in_window_;
      return true;
    }
    ++suppressed_;
    return false;
  }

 private:
  double window_start_ = 0.0;
  int in_window_ = 0;
  int suppressed_ = 0;
};
LogLimiter log_limiter;

constexpr int receive_high_water_mark = 64;
constexpr int hard_max_message_bytes = 256 << 20;

}  // namespace

IngestServer::IngestServer(zmq::context_t& context, const IngestOptions& options,
                           store::StoreWriter& writer)
    : options_(options),
      writer_(writer),
      ingest_(context, zmq::socket_type::router) {}

IngestServer::~IngestServer() {
  if (wake_fd_ >= 0) ::close(wake_fd_);
}

Status IngestServer::create(zmq::context_t& context, const IngestOptions& options,
                                   store::StoreWriter& writer,
                                   const std::map<std::string, store::SourceState>& sources,
                                   std::unique_ptr<IngestServer>& out) {
  std::unique_ptr<IngestServer> s(new IngestServer(context, options, writer));
  s->started_unix_ = unix_now();
  for (const auto& [name, state] : sources) {
    auto rt = std::make_unique<SourceRuntime>();
    rt->state = state;
    rt->name = name;
    rt->validated_seq = state.highest_seq;
    rt->validated_t = state.last_t;
    rt->durable_seq = state.highest_seq;
    rt->last_t = state.last_t;
    rt->future_tolerance_s = options.time_future_tolerance_s;
    rt->has_driver = options.driver_sources.count(name) != 0;
    if (auto t = options.source_future_tolerance_s.find(name); t != options.source_future_tolerance_s.end()) {
      rt->future_tolerance_s = t->second;
    }
    s->sources_[name] = std::move(rt);
    s->inbox_[name];
  }
  s->wake_fd_ = ::eventfd(0, EFD_NONBLOCK | EFD_CLOEXEC);
  if (s->wake_fd_ < 0) return Status::unavailable("cannot create an eventfd");
  try {
    s->ingest_.set(zmq::sockopt::linger, 0);
    s->ingest_.set(zmq::sockopt::rcvhwm, receive_high_water_mark);
    s->ingest_.set(zmq::sockopt::maxmsgsize, std::int64_t{hard_max_message_bytes});
    if (auto e = config::prepare_ipc_endpoint(options.endpoints.ingest)) return Status::unavailable(*e);
    s->ingest_.bind(options.endpoints.ingest);
    if (auto e = config::restrict_ipc_endpoint(options.endpoints.ingest)) return Status::unavailable(*e);
  } catch (const zmq::error_t& e) {
    return Status::unavailable(std::string("cannot bind the ingest socket: ") + e.what());
  }
  s->publish_status();
  out = std::move(s);
  return Status::success();
}

void IngestServer::run(const std::atomic<bool>& stop) {
  double last_tick = 0.0;
  while (!stop.load()) {
    zmq::pollitem_t ingest_item{};
    try {
      ingest_item = poll_once();
    } catch (const zmq::error_t& e) {
      if (e.num() == EINTR) continue;
      spdlog::error("poll failed: {}", e.what());
      break;
    }
    take_completions_and_offers();
    read_ingest_socket(ingest_item);
    publish_status();
    tick(last_tick);
  }
  spdlog::info("stopping: writing what is queued");
  write_what_was_taken();
  writer_.stop();
  drain_completions();
  publish_status();
}

// Waits for a message, a completion or a driver's offer. While a batch waits
// for room in the writer's queue, the ingest socket is not read: that is the
// back-pressure.
zmq::pollitem_t IngestServer::poll_once() {
  zmq::pollitem_t items[] = {
      {ingest_.handle(), 0, ZMQ_POLLIN, 0},
      {nullptr, wake_fd_, ZMQ_POLLIN, 0},
  };
  if (held_) items[0].events = 0;
  zmq::poll(items, 2, std::chrono::milliseconds(held_ ? 5 : 100));
  if (items[1].revents & ZMQ_POLLIN) {
    std::uint64_t n = 0;
    [[maybe_unused]] auto r = ::read(wake_fd_, &n, sizeof n);
  }
  return items[0];
}

// Acks what the writer committed, retries a held batch, takes the drivers'
// hand-overs and identities.
void IngestServer::take_completions_and_offers() {
  drain_completions();
  if (held_ && submit(*held_)) held_.reset();
  if (!held_) drain_driver_inbox();
  submit_identities();
}

// Bounded work per wake-up so that the acks stay responsive.
void IngestServer::read_ingest_socket(const zmq::pollitem_t& item) {
  for (int i = 0; i < 64 && !held_ && (item.revents & ZMQ_POLLIN); ++i) {
    if (!(ingest_.get(zmq::sockopt::events) & ZMQ_POLLIN)) break;
    on_ingest_message();
  }
}

// About once a second: the sources' rates, and the tick handler (health).
void IngestServer::tick(double& last_tick) {
  const double now = unix_now();
  if (now - last_tick < 1.0) return;
  last_tick = now;
  for (auto& [name, src] : sources_) src->rate.sample(now, src->accepted);
  publish_status();
  if (tick_handler_) tick_handler_(status());
}

// On stopping: a driver's hand-over that offer_driver_readings took (it
// returned true, so the driver dropped the readings) and a batch held for
// room in the writer's queue are written, not dropped. The inbox is closed
// first, so that drivers still running keep what they read from now on.
// The writer is still running and empties its queue, so room comes; the wait
// is bounded all the same, and a batch still held at its end is refused
// (a sender keeps and resends it) or, a driver's, logged as lost.
void IngestServer::write_what_was_taken() {
  {
    std::lock_guard lock(inbox_mutex_);
    inbox_closed_ = true;
  }
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(30);
  while (std::chrono::steady_clock::now() < deadline) {
    drain_completions();
    if (held_ && submit(*held_)) held_.reset();
    if (!held_) drain_driver_inbox();
    if (!held_ && driver_inbox_empty()) break;
    std::this_thread::sleep_for(std::chrono::milliseconds(5));
  }
  if (held_) {
    if (held_->peer.internal) {
      spdlog::error("source {}: {} readings from its driver could not be written before stopping "
                    "(the store writer had no room for 30 s)",
                    held_->source != nullptr ? held_->source->name : "?", held_->ack.accepted);
    } else {
      refuse(held_->peer, held_->ack.batch_id, Reason::shutting_down, "lphid is stopping");
    }
    held_.reset();
  }
}

void IngestServer::on_ingest_message() {
  std::vector<zmq::message_t> frames;
  while (true) {
    zmq::message_t frame;
    if (!ingest_.recv(frame, zmq::recv_flags::dontwait)) break;
    const bool more = frame.more();
    if (frames.size() < 8) frames.push_back(std::move(frame));
    if (!more) break;
  }
  if (frames.empty()) return;
  Peer peer;
  peer.identity = frames[0].to_string();
  std::string_view payload;
  if (frames.size() == 2) {
    payload = frames[1].to_string_view();
  } else if (frames.size() == 3 && frames[1].size() == 0) {
    peer.delimiter = true;
    payload = frames[2].to_string_view();
  } else {
    peer.delimiter = frames.size() > 1 && frames[1].size() == 0;
    refuse(peer, std::nullopt, Reason::bad_envelope,
           "a message is one frame (after the REQ delimiter, if any), not " +
               std::to_string(frames.size() - 1));
    return;
  }
  handle_request(peer, payload);
}

void IngestServer::handle_request(const Peer& in, std::string_view payload) {
  Peer peer = in;
  json message;
  auto bad = protocol::decode_frame(payload, options_.limits, message, peer.encoding);
  if (bad) return refuse(peer, std::nullopt, bad->reason, bad->detail);
  protocol::RequestType type{};
  if (auto r = protocol::read_request_type(message, type)) {
    return refuse(peer, std::nullopt, r->reason, r->detail);
  }
  if (type == protocol::RequestType::hello) return handle_hello(peer, message);
  handle_batch(peer, message);
}

void IngestServer::handle_hello(const Peer& peer, const json& message) {
  protocol::HelloRequest hello;
  if (auto r = protocol::read_hello(message, options_.limits, hello)) {
    return refuse(peer, std::nullopt, r->reason, r->detail);
  }
  auto it = sources_.find(hello.source);
  if (it == sources_.end()) {
    return refuse(peer, std::nullopt, Reason::unknown_source,
                  "source \"" + hello.source + "\" is not in lphid's configuration");
  }
  const auto& s = *it->second;
  if (s.has_driver) {
    return refuse(peer, std::nullopt, Reason::source_has_driver,
                  "source \"" + hello.source + "\" is read by lphid's own driver");
  }
  reply(ingest_, peer,
        protocol::hello_reply_message(
            {s.name, s.state.kind, s.durable_seq ? *s.durable_seq + 1 : std::int64_t{0}}));
}

void IngestServer::handle_batch(const Peer& peer, const json& message) {
  protocol::BatchHeader header;
  if (auto r = protocol::read_batch_header(message, options_.limits, header)) {
    std::optional<std::uint64_t> id;
    if (auto b = message.find("batch"); b != message.end() && b->is_number_unsigned()) {
      id = b->get<std::uint64_t>();
    }
    return refuse(peer, id, r->reason, r->detail);
  }
  auto it = sources_.find(header.source);
  if (it == sources_.end()) {
    return refuse(peer, header.batch_id, Reason::unknown_source,
                  "source \"" + header.source + "\" is not in lphid's configuration");
  }
  SourceRuntime& source = *it->second;
  if (source.has_driver) {
    return refuse(peer, header.batch_id, Reason::source_has_driver,
                  "source \"" + header.source + "\" is read by lphid's own driver");
  }
  if (header.kind && *header.kind != source.state.kind) {
    return refuse(peer, header.batch_id, Reason::wrong_kind,
                  "source \"" + source.name + "\" is a " +
                      std::string(protocol::kind_name(source.state.kind)) + ", the batch says " +
                      std::string(protocol::kind_name(*header.kind)));
  }
  accept_readings(peer, source, header.batch_id, *header.readings);
}

void IngestServer::accept_readings(const Peer& peer, SourceRuntime& source,
                                   std::optional<std::uint64_t> batch_id, const json& readings_json) {
  Held held;
  held.peer = peer;
  held.source = &source;
  held.ack.batch_id = batch_id;
  held.ack.source = source.name;
  held.job.source_id = source.state.id;
  held.job.readings = protocol::empty_readings(source.state.kind);
  protocol::read_readings(readings_json, source.state.kind, held.job.readings, held.ack.rejected);

  // The checks that need the source's history: a new reading's time may not
  // run back beyond the tolerance; no reading may lie far in the future.
  const double now = unix_now();
  source.last_arrival_unix = now;
  // Positions of the readings that passed, in the batch's readings array.
  std::vector<std::size_t> position;
  position.reserve(protocol::reading_count(held.job.readings));
  for (std::size_t i = 0, r = 0; i < readings_json.size(); ++i) {
    if (r < held.ack.rejected.size() && held.ack.rejected[r].index == i) {
      ++r;
    } else {
      position.push_back(i);
    }
  }
  std::visit(
      [&](auto& readings) {
        std::size_t kept = 0;
        std::size_t index = 0;
        for (auto& r : readings) {
          std::optional<std::string> why;
          if (r.t > now + source.future_tolerance_s) {
            why = "t lies " + std::to_string(r.t - now) + " s ahead of lphid's clock";
          } else if ((!source.validated_seq || r.seq > *source.validated_seq) && source.validated_t &&
                     r.t < *source.validated_t - options_.time_backward_tolerance_s) {
            why = "t runs " + std::to_string(*source.validated_t - r.t) +
                  " s back behind the source's previous reading";
          }
          if (why) {
            protocol::RejectedReading rej;
            rej.index = position[index];
            rej.seq = r.seq;
            rej.reason = Reason::time_out_of_range;
            rej.detail = *why;
            held.ack.rejected.push_back(std::move(rej));
          } else {
            if (!source.validated_seq || r.seq > *source.validated_seq) {
              source.validated_seq = r.seq;
              source.validated_t = r.t;
            }
            if (!held.newest_t || r.t > *held.newest_t) held.newest_t = r.t;
            readings[kept++] = r;
          }
          ++index;
        }
        readings.resize(kept);
      },
      held.job.readings);
  std::sort(held.ack.rejected.begin(), held.ack.rejected.end(),
            [](const auto& a, const auto& b) { return a.index < b.index; });
  for (const auto& r : held.ack.rejected) counters_.rejected_readings.add(r.reason);
  source.rejected += held.ack.rejected.size();
  if (!held.ack.rejected.empty() && log_limiter.allow(now)) {
    spdlog::warn("source {}: {} of {} readings refused, first: {} ({})", source.name,
                 held.ack.rejected.size(), readings_json.size(),
                 protocol::reason_name(held.ack.rejected.front().reason),
                 held.ack.rejected.front().detail);
  }
  ++counters_.batches;
  if (protocol::reading_count(held.job.readings) == 0) {
    // Nothing to store: the answer needs no commit.
    reply(ingest_, peer, protocol::ack_message(held.ack));
    return;
  }
  if (!submit(held)) {
    ++counters_.backpressure_waits;
    held_ = std::move(held);
  }
}

bool IngestServer::submit(Held& held) {
  Completion completion;
  completion.peer = held.peer;
  completion.ack = held.ack;
  completion.source = held.source;
  completion.newest_t = held.newest_t;
  store::WriteJob job;
  job.source_id = held.job.source_id;
  job.readings = std::move(held.job.readings);
  job.on_durable = [this, completion = std::move(completion)](const store::WriteResult& result) mutable {
    completion.result = result;
    {
      std::lock_guard lock(completions_mutex_);
      completions_.push_back(std::move(completion));
    }
    const std::uint64_t one = 1;
    [[maybe_unused]] auto r = ::write(wake_fd_, &one, sizeof one);
  };
  if (writer_.try_submit(job)) return true;
  held.job.readings = std::move(job.readings);
  return false;
}

void IngestServer::drain_completions() {
  std::vector<Completion> done;
  {
    std::lock_guard lock(completions_mutex_);
    done.swap(completions_);
  }
  for (auto& c : done) finish(c);
}

void IngestServer::finish(Completion& c) {
  SourceRuntime& s = *c.source;
  if (!c.result.status) {
    spdlog::error("source {}: a write failed: {}", s.name, c.result.status.message());
    counters_.refused_messages.add(Reason::storage_error);
    // The readings passed validation but are not stored: allow them again.
    s.validated_seq = s.durable_seq;
    s.validated_t = s.last_t;
    refuse(c.peer, c.ack.batch_id, Reason::storage_error, "the database refused the write");
    return;
  }
  c.ack.accepted = c.result.accepted;
  c.ack.duplicates = c.result.duplicates;
  c.ack.durable_through = c.result.durable_through;
  counters_.accepted += c.result.accepted;
  counters_.duplicates += c.result.duplicates;
  counters_.gaps += c.result.gaps_recorded;
  s.accepted += c.result.accepted;
  s.duplicates += c.result.duplicates;
  if (c.result.durable_through && (!s.durable_seq || *c.result.durable_through > *s.durable_seq)) {
    s.durable_seq = c.result.durable_through;
  }
  if (c.newest_t && (!s.last_t || *c.newest_t > *s.last_t)) s.last_t = c.newest_t;
  if (c.result.gaps_recorded > 0) {
    spdlog::warn("source {}: {} gap(s) in the sequence numbers recorded", s.name, c.result.gaps_recorded);
  }
  reply(ingest_, c.peer, protocol::ack_message(c.ack));
}

void IngestServer::refuse(const Peer& peer, std::optional<std::uint64_t> batch_id, Reason reason,
                          const std::string& detail) {
  counters_.refused_messages.add(reason);
  if (peer.internal) {
    // A driver's readings cannot be sent again (the driver handed them over):
    // the store will show their sequence numbers as a gap.
    spdlog::error("readings of a driver lost: {} ({})", protocol::reason_name(reason), detail);
    return;
  }
  if (log_limiter.allow(unix_now())) {
    spdlog::warn("message refused: {} ({})", protocol::reason_name(reason), detail);
  }
  reply(ingest_, peer, protocol::error_message({batch_id, reason, detail}));
}

void IngestServer::reply(zmq::socket_t& socket, const Peer& peer, const json& message) {
  if (peer.internal) return;
  publish_status();  // a sender that holds the reply finds it counted
  const std::string payload = protocol::encode_frame(message, peer.encoding);
  try {
    socket.send(zmq::buffer(peer.identity), zmq::send_flags::sndmore | zmq::send_flags::dontwait);
    if (peer.delimiter) socket.send(zmq::message_t(), zmq::send_flags::sndmore | zmq::send_flags::dontwait);
    socket.send(zmq::buffer(payload), zmq::send_flags::dontwait);
  } catch (const zmq::error_t& e) {
    spdlog::debug("a reply could not be sent: {}", e.what());
  }
}

void IngestServer::set_tick_handler(std::function<void(const IngestStatus& status)> handler) {
  tick_handler_ = std::move(handler);
}

void IngestServer::publish_status() {
  IngestStatus st;
  st.started_unix = started_unix_;
  st.counters = counters_;
  st.backpressure = held_.has_value();
  st.sources.reserve(sources_.size());
  for (const auto& [name, src] : sources_) {
    SourceStatus out;
    out.name = name;
    out.kind = src->state.kind;
    out.accepted = src->accepted;
    out.duplicates = src->duplicates;
    out.rejected = src->rejected;
    out.rate_per_s = src->rate.rate_per_s();
    out.highest_seq = src->durable_seq;
    out.last_t = src->last_t;
    if (src->last_arrival_unix > 0.0) out.last_arrival_unix = src->last_arrival_unix;
    out.instrument_identity = src->instrument_identity;
    st.sources.push_back(std::move(out));
  }
  std::lock_guard lock(status_mutex_);
  status_ = std::move(st);
}

IngestStatus IngestServer::status() const {
  IngestStatus st;
  {
    std::lock_guard lock(status_mutex_);
    st = status_;
  }
  st.writer = writer_.stats();
  return st;
}

}  // namespace lphi::ingest
