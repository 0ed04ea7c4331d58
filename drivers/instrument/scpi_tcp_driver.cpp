#include "drivers/instrument/scpi_tcp_driver.hpp"

#include <utility>

#include "drivers/instrument/driver_core.hpp"
#include "drivers/instrument/quantities.hpp"

namespace lphi::drivers {

class ScpiTcpDriver::Impl final : public detail::DriverCore {
 public:
  Impl(boost::asio::io_context& io, ScpiTcpConfig config, DriverHooks hooks)
      : DriverCore(io,
                   detail::CoreOptions{config.source, config.kind, config.connection, config.backoff,
                                       config.outlet, config.stall_after, false},
                   std::move(hooks)),
        config_(std::move(config)),
        poll_timer_(io) {}

 private:
  void on_session_start() override {
    if (config_.identity_query.empty()) {
      begin_polling();
      return;
    }
    query(config_.identity_query, [this](std::string line, std::chrono::system_clock::time_point) {
      const auto first = line.find_first_not_of(" \t\r");
      const auto last = line.find_last_not_of(" \t\r");
      std::string identity = first == std::string::npos ? "" : line.substr(first, last - first + 1);
      update([&](DriverStatus& s) { s.identity = identity; });
      log(LogLevel::info, "identity: " + identity);
      if (hooks_.on_identity) hooks_.on_identity(identity);
      begin_polling();
    });
  }

  void on_session_end() override { poll_timer_.cancel(); }

  // Sends one query and hands its reply line on, under reply_timeout.
  void query(const std::string& text, LineHandler on_reply) {
    // Anything already received now was not asked for.
    std::uint64_t stale = 0;
    while (framer_.next_line()) ++stale;
    if (framer_.partial_bytes() > 0) {
      ++stale;
      framer_.reset();
    }
    for (std::uint64_t i = 0; i < stale; ++i) count_garbage("a line nobody asked for");
    arm_reply_timer(config_.reply_timeout);
    send_line(text, [this, on_reply = std::move(on_reply)]() mutable { read_line(std::move(on_reply)); });
  }

  void begin_polling() {
    next_poll_ = detail::Clock::now();
    run_poll();
  }

  void run_poll() {
    update([](DriverStatus& s) { ++s.polls; });
    values_ = QuantityValues{};
    next_query_ = 0;
    ask_next();
  }

  void ask_next() {
    if (next_query_ == config_.queries.size()) {
      finish_poll();
      return;
    }
    const ScpiQuery& q = config_.queries[next_query_];
    query(q.send, [this](std::string line, std::chrono::system_clock::time_point arrival) {
      const ScpiQuery& asked = config_.queries[next_query_];
      const std::string error = extract_delimited(asked.fields, line, ',', values_);
      if (!error.empty()) {
        count_garbage("reply to '" + asked.send + "': " + error);
        schedule_poll();
        return;
      }
      last_arrival_ = arrival;
      ++next_query_;
      ask_next();
    });
  }

  void finish_poll() {
    auto reading = make_reading(config_.kind, values_, detail::unix_seconds(last_arrival_));
    if (reading) emit(std::move(*reading), last_arrival_);
    else count_garbage("the replies lack a required quantity");
    schedule_poll();
  }

  void schedule_poll() {
    next_poll_ += config_.poll_interval;
    const auto now = detail::Clock::now();
    if (next_poll_ <= now) {
      const auto behind = (now - next_poll_) / config_.poll_interval + 1;
      update([&](DriverStatus& s) { s.missed_polls += static_cast<std::uint64_t>(behind); });
      next_poll_ += behind * config_.poll_interval;
    }
    poll_timer_.expires_at(next_poll_);
    poll_timer_.async_wait(guarded([this](const boost::system::error_code& ec) {
      if (ec) return;
      run_poll();
    }));
  }

  ScpiTcpConfig config_;
  boost::asio::steady_timer poll_timer_;
  detail::Clock::time_point next_poll_{};
  QuantityValues values_;
  std::size_t next_query_ = 0;
  std::chrono::system_clock::time_point last_arrival_{};
};

std::unique_ptr<ScpiTcpDriver> ScpiTcpDriver::create(boost::asio::io_context& io,
                                                     ScpiTcpConfig config, DriverHooks hooks,
                                                     std::string* error) {
  std::string problem = validate(config);
  if (problem.empty() && !hooks.sink) problem = "scpi-tcp driver '" + config.source + "': no sink";
  if (!problem.empty()) {
    if (error) *error = problem;
    return nullptr;
  }
  auto impl = std::make_shared<Impl>(io, std::move(config), std::move(hooks));
  return std::unique_ptr<ScpiTcpDriver>(new ScpiTcpDriver(std::move(impl)));
}

ScpiTcpDriver::ScpiTcpDriver(std::shared_ptr<Impl> impl) : impl_(std::move(impl)) {}
ScpiTcpDriver::~ScpiTcpDriver() { impl_->stop(); }
void ScpiTcpDriver::start() { impl_->start(); }
void ScpiTcpDriver::stop() { impl_->stop(); }
DriverStatus ScpiTcpDriver::status() const { return impl_->status(); }

}  // namespace lphi::drivers
