#include "drivers/instrument/driver_core.hpp"

#include <boost/asio/connect.hpp>
#include <boost/asio/post.hpp>
#include <boost/asio/write.hpp>
#include <utility>

namespace lphi::drivers::detail {
DriverCore::DriverCore(asio::io_context& io, CoreOptions options, DriverHooks hooks)
    : io_(io),
      strand_(asio::make_strand(io)),
      options_(std::move(options)),
      hooks_(std::move(hooks)),
      framer_(options_.connection.terminator, options_.connection.max_line_bytes),
      socket_(io),
      resolver_(io),
      reply_timer_(io),
      connect_timer_(io),
      backoff_timer_(io),
      sink_timer_(io),
      backoff_(options_.backoff, options_.backoff.seed.value_or(seed_from_name(options_.source))),
      outlet_(options_.kind, options_.outlet, hooks_.sink) {
  status_.source = options_.source;
  status_.kind = options_.kind;
  status_.next_seq = options_.outlet.first_seq;
}

std::string DriverCore::open_acceptor() {
  boost::system::error_code ec;
  const auto address = asio::ip::make_address(options_.connection.host, ec);
  if (ec) return "listen address '" + options_.connection.host + "' is not an IP address";
  const tcp::endpoint endpoint(address, options_.connection.port);
  acceptor_.emplace(io_);
  acceptor_->open(endpoint.protocol(), ec);
  if (!ec) acceptor_->set_option(tcp::acceptor::reuse_address(true), ec);
  if (!ec) acceptor_->bind(endpoint, ec);
  if (!ec) acceptor_->listen(asio::socket_base::max_listen_connections, ec);
  if (ec) {
    acceptor_.reset();
    return "cannot listen on " + options_.connection.host + ":" +
           std::to_string(options_.connection.port) + ": " + ec.message();
  }
  local_port_ = acceptor_->local_endpoint().port();
  return {};
}

void DriverCore::start() {
  asio::post(strand_, [self = shared_from_this()] {
    if (self->running_ || self->stopped_.load()) return;
    self->running_ = true;
    self->begin_connect();
  });
}

void DriverCore::stop() {
  stopped_.store(true);
  asio::post(strand_, [self = shared_from_this()] {
    const bool was_in_session = self->in_session_;
    self->running_ = false;
    self->in_session_ = false;
    ++self->epoch_;
    boost::system::error_code ignored;
    self->resolver_.cancel();
    self->close_socket();
    if (self->acceptor_) self->acceptor_->close(ignored);
    self->reply_timer_.cancel();
    self->connect_timer_.cancel();
    self->backoff_timer_.cancel();
    self->sink_timer_.cancel();
    self->line_handler_ = nullptr;
    if (was_in_session) self->on_session_end();
    self->set_state(DriverState::stopped);
  });
}

DriverStatus DriverCore::status() const {
  std::lock_guard lock(status_mutex_);
  DriverStatus s = status_;
  if (s.state == DriverState::connected && Clock::now() - last_progress_ > options_.stall_after)
    s.state = DriverState::stalled;
  return s;
}

void DriverCore::set_state(DriverState state) {
  update([&](DriverStatus& s) {
    s.state = state;
    if (state == DriverState::connected) {
      s.connected_since = std::chrono::system_clock::now();
      last_progress_ = Clock::now();
    } else {
      s.connected_since.reset();
    }
  });
}

void DriverCore::log(LogLevel level, const std::string& message) const {
  if (hooks_.log) hooks_.log(level, options_.source + ": " + message);
}

void DriverCore::begin_connect() {
  set_state(DriverState::connecting);
  if (options_.listen) {
    begin_accept();
    return;
  }
  connect_timed_out_ = false;
  connect_timer_.expires_after(options_.connection.connect_timeout);
  connect_timer_.async_wait(guarded([this](const boost::system::error_code& ec) {
    if (ec) return;  // cancelled: the attempt finished first
    connect_timed_out_ = true;
    resolver_.cancel();
    close_socket();
  }));
  resolver_.async_resolve(
      options_.connection.host, std::to_string(options_.connection.port),
      guarded([this](const boost::system::error_code& ec, const tcp::resolver::results_type& results) {
        if (ec) {
          connect_timer_.cancel();
          ++epoch_;
          update([&](DriverStatus& s) {
            if (connect_timed_out_) ++s.faults.connect_timeouts; else ++s.faults.connect_failures;
            s.last_error = connect_timed_out_ ? "connect timed out (resolving the host)"
                                              : "cannot resolve '" + options_.connection.host + "': " + ec.message();
          });
          schedule_reconnect();
          return;
        }
        asio::async_connect(
            socket_, results,
            guarded([this](const boost::system::error_code& cec, const tcp::endpoint&) {
              connect_timer_.cancel();
              ++epoch_;
              if (cec) {
                close_socket();
                update([&](DriverStatus& s) {
                  if (connect_timed_out_) ++s.faults.connect_timeouts; else ++s.faults.connect_failures;
                  s.last_error = connect_timed_out_ ? "connect timed out"
                                                    : "connect failed: " + cec.message();
                });
                log(LogLevel::warning, connect_timed_out_ ? "connect timed out" : "connect failed: " + cec.message());
                schedule_reconnect();
                return;
              }
              on_connected();
            }));
      }));
}

void DriverCore::begin_accept() {
  if (!acceptor_) {
    update([&](DriverStatus& s) { s.last_error = "not listening"; });
    return;
  }
  acceptor_->async_accept(socket_, guarded([this](const boost::system::error_code& ec) {
    if (ec) {
      close_socket();
      update([&](DriverStatus& s) {
        ++s.faults.connect_failures;
        s.last_error = "accept failed: " + ec.message();
      });
      ++epoch_;
      schedule_reconnect();  // e.g. out of file descriptors: do not spin
      return;
    }
    ++epoch_;
    on_connected();
  }));
}

void DriverCore::on_connected() {
  boost::system::error_code ignored;
  socket_.set_option(tcp::no_delay(true), ignored);
  framer_.reset();
  in_session_ = true;
  read_pending_ = false;
  line_handler_ = nullptr;
  const bool again = ever_connected_;
  ever_connected_ = true;
  set_state(DriverState::connected);
  update([&](DriverStatus& s) {
    if (again) ++s.faults.reconnects;
  });
  log(LogLevel::info, again ? "reconnected" : "connected");
  on_session_start();
}

void DriverCore::schedule_reconnect() {
  if (options_.listen) {
    // A listener has nobody to back off from: it waits for the next peer.
    begin_connect();
    return;
  }
  const auto delay = backoff_.next_delay();
  set_state(DriverState::backoff);
  backoff_timer_.expires_after(delay);
  backoff_timer_.async_wait(guarded([this](const boost::system::error_code& ec) {
    if (ec) return;
    begin_connect();
  }));
}

void DriverCore::close_socket() {
  boost::system::error_code ignored;
  if (socket_.is_open()) {
    socket_.shutdown(tcp::socket::shutdown_both, ignored);
    socket_.close(ignored);
  }
}

void DriverCore::end_session(SessionEnd why, const std::string& message) {
  if (!in_session_) return;
  in_session_ = false;
  ++epoch_;
  ++reply_timer_token_;
  reply_timer_.cancel();
  line_handler_ = nullptr;
  read_pending_ = false;
  close_socket();
  framer_.reset();
  on_session_end();
  update([&](DriverStatus& s) { s.last_error = message; });
  log(LogLevel::warning, message);
  if (why != SessionEnd::stopped) schedule_reconnect();
}

void DriverCore::arm_reply_timer(std::chrono::milliseconds timeout) {
  const std::uint64_t token = ++reply_timer_token_;
  reply_timer_.expires_after(timeout);
  reply_timer_.async_wait(guarded([this, token, timeout](const boost::system::error_code& ec) {
    if (ec || token != reply_timer_token_) return;
    const std::size_t partial = framer_.partial_bytes();
    update([&](DriverStatus& s) {
      if (partial > 0) ++s.faults.partial_lines; else ++s.faults.reply_timeouts;
    });
    end_session(SessionEnd::reply_timeout,
                partial > 0 ? "line unfinished after " + std::to_string(timeout.count()) + " ms (" +
                                  std::to_string(partial) + " bytes without a terminator)"
                            : "no reply within " + std::to_string(timeout.count()) + " ms");
  }));
}

void DriverCore::read_line(LineHandler on_line) {
  line_handler_ = std::move(on_line);
  if (framer_.has_line()) {
    asio::post(strand_, guarded([this] { deliver_line(); }));
    return;
  }
  start_read();
}

void DriverCore::deliver_line() {
  if (!line_handler_ || !framer_.has_line()) return;
  ++reply_timer_token_;  // the line came in time: the timer is spent
  reply_timer_.cancel();
  auto handler = std::exchange(line_handler_, nullptr);
  handler(*framer_.next_line(), std::chrono::system_clock::now());
}

void DriverCore::start_read() {
  if (read_pending_) return;
  read_pending_ = true;
  socket_.async_read_some(asio::buffer(read_buffer_),
                          guarded([this](const boost::system::error_code& ec, std::size_t n) {
                            on_read(ec, n);
                          }));
}

void DriverCore::on_read(const boost::system::error_code& ec, std::size_t n) {
  read_pending_ = false;
  if (n > 0) {
    framer_.feed(std::string_view(read_buffer_.data(), n));
    const std::uint64_t overlong = framer_.take_overlong();
    update([&](DriverStatus& s) {
      s.bytes_received += n;
      s.faults.overlong_lines += overlong;
      if (overlong > 0)
        s.last_error = "line longer than " + std::to_string(options_.connection.max_line_bytes) +
                       " bytes discarded";
    });
  }
  if (ec) {
    const std::size_t partial = framer_.partial_bytes();
    update([&](DriverStatus& s) {
      ++s.faults.disconnects;
      if (partial > 0) ++s.faults.partial_lines;
    });
    end_session(SessionEnd::disconnect,
                partial > 0 ? "disconnected in the middle of a line (" + ec.message() + ")"
                            : "disconnected (" + ec.message() + ")");
    return;
  }
  if (line_handler_ && framer_.has_line()) {
    deliver_line();
    return;
  }
  if (line_handler_) start_read();
}

void DriverCore::send_line(const std::string& text, std::function<void()> then) {
  auto frame = std::make_shared<std::string>(text + options_.connection.terminator);
  asio::async_write(socket_, asio::buffer(*frame),
                    guarded([this, frame, then = std::move(then)](const boost::system::error_code& ec,
                                                                  std::size_t n) {
                      update([&](DriverStatus& s) { s.bytes_sent += n; });
                      if (ec) {
                        update([&](DriverStatus& s) { ++s.faults.disconnects; });
                        end_session(SessionEnd::disconnect, "write failed (" + ec.message() + ")");
                        return;
                      }
                      then();
                    }));
}

void DriverCore::emit(Reading reading, std::chrono::system_clock::time_point arrival) {
  backoff_.succeeded();
  outlet_.push(std::move(reading));
  update([&](DriverStatus& s) {
    s.last_reading_at = arrival;
    last_progress_ = Clock::now();
    s.readings = outlet_.made();
    s.delivered = outlet_.delivered();
    s.dropped_readings = outlet_.dropped();
    s.sink_refusals = outlet_.refusals();
    s.buffered = outlet_.buffered();
    s.next_seq = outlet_.next_seq();
  });
  if (outlet_.buffered() > 0) arm_sink_retry();
}

void DriverCore::arm_sink_retry() {
  if (sink_timer_armed_) return;
  sink_timer_armed_ = true;
  sink_timer_.expires_after(options_.outlet.sink_retry_interval);
  sink_timer_.async_wait(asio::bind_executor(
      strand_, [self = shared_from_this(), this](const boost::system::error_code& ec) {
        sink_timer_armed_ = false;
        if (ec || !running_ || stopped_.load()) return;
        outlet_.drain();
        update([&](DriverStatus& s) {
          s.delivered = outlet_.delivered();
          s.sink_refusals = outlet_.refusals();
          s.buffered = outlet_.buffered();
        });
        if (outlet_.buffered() > 0) arm_sink_retry();
      }));
}

void DriverCore::count_garbage(const std::string& message) {
  update([&](DriverStatus& s) {
    ++s.faults.garbage_replies;
    s.last_error = "garbage: " + message;
  });
  log(LogLevel::debug, "garbage: " + message);
}

}  // namespace lphi::drivers::detail

namespace lphi::drivers {

std::string_view state_name(DriverState state) {
  switch (state) {
    case DriverState::stopped: return "stopped";
    case DriverState::connecting: return "connecting";
    case DriverState::connected: return "connected";
    case DriverState::stalled: return "stalled";
    case DriverState::backoff: return "backoff";
  }
  return "unknown";
}

}  // namespace lphi::drivers
