// DriverCore: the connection machinery every lphi driver shares (internal to
// drivers/instrument; lphid uses the driver classes, not this).
//
// It owns the socket, the timers and the line framer, runs everything on one
// strand, and keeps the status. A session is one connection: it starts when
// the TCP connection is made (or accepted) and ends on the first fault, after
// which the core waits out the backoff and connects again. Every handler
// carries the epoch of the session that started it, and an ended session's
// epoch is never current again, so a late completion of an old socket or
// timer can never act on a new connection.
//
// Lifetime: the core lives in a shared_ptr and every pending handler holds a
// reference, so the object outlives the last completion even after stop().
#pragma once

#include <atomic>
#include <boost/asio/bind_executor.hpp>
#include <boost/asio/io_context.hpp>
#include <boost/asio/ip/tcp.hpp>
#include <boost/asio/steady_timer.hpp>
#include <boost/asio/strand.hpp>
#include <array>
#include <chrono>
#include <functional>
#include <memory>
#include <mutex>
#include <optional>
#include <string>

#include "drivers/instrument/backoff.hpp"
#include "drivers/instrument/driver_config.hpp"
#include "drivers/instrument/driver_status.hpp"
#include "drivers/instrument/instrument_driver.hpp"
#include "drivers/instrument/line_framer.hpp"
#include "drivers/instrument/reading_outlet.hpp"

namespace lphi::drivers::detail {

namespace asio = boost::asio;
using tcp = asio::ip::tcp;
using Clock = std::chrono::steady_clock;

struct CoreOptions {
  std::string source;
  protocol::SourceKind kind = protocol::SourceKind::lockin;
  ConnectionOptions connection;
  BackoffOptions backoff;
  OutletOptions outlet;
  std::chrono::milliseconds stall_after{5000};
  bool listen = false;
};

inline double unix_seconds(std::chrono::system_clock::time_point t) {
  return std::chrono::duration<double>(t.time_since_epoch()).count();
}

enum class SessionEnd { reply_timeout, disconnect, stopped };

class DriverCore : public std::enable_shared_from_this<DriverCore> {
 public:
  DriverCore(asio::io_context& io, CoreOptions options, DriverHooks hooks);
  virtual ~DriverCore() = default;
  DriverCore(const DriverCore&) = delete;
  DriverCore& operator=(const DriverCore&) = delete;

  // Listen mode: binds and listens now, so a bad address fails at once.
  std::string open_acceptor();
  std::uint16_t local_port() const { return local_port_; }

  void start();
  void stop();
  DriverStatus status() const;

 protected:
  using LineHandler = std::function<void(std::string line, std::chrono::system_clock::time_point arrival)>;

  virtual void on_session_start() = 0;
  virtual void on_session_end() {}

  // The next complete line, to `on_line`, unless the session ends first.
  void read_line(LineHandler on_line);
  // Writes `text` plus the terminator, then calls `then` (same session only).
  void send_line(const std::string& text, std::function<void()> then);
  // Ends the session if no line arrives within `timeout` (counted as a
  // partial line when some bytes of one came, else as a reply timeout).
  void arm_reply_timer(std::chrono::milliseconds timeout);
  void end_session(SessionEnd why, const std::string& message);

  void emit(Reading reading, std::chrono::system_clock::time_point arrival);
  void count_garbage(const std::string& message);
  void log(LogLevel level, const std::string& message) const;
  template <class F>
  void update(F&& f) {
    std::lock_guard lock(status_mutex_);
    f(status_);
  }
  // Wraps a handler so that it runs on the strand and only while the session
  // (epoch) that created it is current and the driver runs.
  template <class F>
  auto guarded(F&& f) {
    return asio::bind_executor(
        strand_, [self = shared_from_this(), epoch = epoch_, f = std::forward<F>(f)](auto&&... args) mutable {
          if (!self->running_ || self->stopped_.load() || epoch != self->epoch_) return;
          f(std::forward<decltype(args)>(args)...);
        });
  }

  asio::io_context& io_;
  asio::strand<asio::io_context::executor_type> strand_;
  CoreOptions options_;
  DriverHooks hooks_;
  LineFramer framer_;
  std::uint64_t epoch_ = 0;
  bool in_session_ = false;

 private:
  void begin_connect();
  void begin_accept();
  void on_connected();
  void schedule_reconnect();
  void start_read();
  void on_read(const boost::system::error_code& ec, std::size_t n);
  void deliver_line();
  void arm_sink_retry();
  void close_socket();
  void set_state(DriverState state);

  tcp::socket socket_;
  tcp::resolver resolver_;
  std::optional<tcp::acceptor> acceptor_;
  asio::steady_timer reply_timer_;
  asio::steady_timer connect_timer_;
  asio::steady_timer backoff_timer_;
  asio::steady_timer sink_timer_;
  std::uint64_t reply_timer_token_ = 0;
  bool connect_timed_out_ = false;
  bool sink_timer_armed_ = false;
  bool read_pending_ = false;
  bool ever_connected_ = false;
  bool running_ = false;
  std::atomic<bool> stopped_{false};
  std::uint16_t local_port_ = 0;
  LineHandler line_handler_;
  std::array<char, 4096> read_buffer_{};
  Backoff backoff_;
  ReadingOutlet outlet_;

  mutable std::mutex status_mutex_;
  DriverStatus status_;
  Clock::time_point last_progress_{};
};

}  // namespace lphi::drivers::detail
