#include "drivers/instrument/line_stream_driver.hpp"

#include <utility>

#include "drivers/instrument/driver_core.hpp"
#include "drivers/instrument/quantities.hpp"

namespace lphi::drivers {

class LineStreamDriver::Impl final : public detail::DriverCore {
 public:
  Impl(boost::asio::io_context& io, LineStreamConfig config, DriverHooks hooks)
      : DriverCore(io,
                   detail::CoreOptions{config.source, config.kind, config.connection, config.backoff,
                                       config.outlet, config.stall_after,
                                       config.mode == LineStreamConfig::Mode::listen},
                   std::move(hooks)),
        config_(std::move(config)) {}

 private:
  void on_session_start() override { wait_for_line(); }

  void wait_for_line() {
    arm_reply_timer(config_.silence_timeout);
    read_line([this](std::string line, std::chrono::system_clock::time_point arrival) {
      take(line, arrival);
      wait_for_line();
    });
  }

  void take(std::string_view line, std::chrono::system_clock::time_point arrival) {
    const auto first = line.find_first_not_of(" \t\r");
    if (first == std::string_view::npos || line[first] == '#') {
      update([](DriverStatus& s) { ++s.skipped_lines; });
      return;
    }
    QuantityValues values;
    const std::string error = config_.format == LineStreamConfig::Format::json
                                  ? extract_json(config_.fields, line, values)
                                  : extract_delimited(config_.fields, line, config_.csv_delimiter, values);
    if (!error.empty()) {
      count_garbage(error);
      return;
    }
    auto reading = make_reading(config_.kind, values, detail::unix_seconds(arrival));
    if (!reading) {
      count_garbage("the line lacks a required quantity");
      return;
    }
    emit(std::move(*reading), arrival);
  }

  LineStreamConfig config_;
};

std::unique_ptr<LineStreamDriver> LineStreamDriver::create(boost::asio::io_context& io,
                                                           LineStreamConfig config,
                                                           DriverHooks hooks, std::string* error) {
  std::string problem = validate(config);
  if (problem.empty() && !hooks.sink) problem = "line-stream driver '" + config.source + "': no sink";
  const bool listen = config.mode == LineStreamConfig::Mode::listen;
  std::shared_ptr<Impl> impl;
  if (problem.empty()) {
    impl = std::make_shared<Impl>(io, std::move(config), std::move(hooks));
    if (listen) problem = impl->open_acceptor();
  }
  if (!problem.empty()) {
    if (error) *error = problem;
    return nullptr;
  }
  return std::unique_ptr<LineStreamDriver>(new LineStreamDriver(std::move(impl)));
}

LineStreamDriver::LineStreamDriver(std::shared_ptr<Impl> impl) : impl_(std::move(impl)) {}
LineStreamDriver::~LineStreamDriver() { impl_->stop(); }
void LineStreamDriver::start() { impl_->start(); }
void LineStreamDriver::stop() { impl_->stop(); }
DriverStatus LineStreamDriver::status() const { return impl_->status(); }
std::uint16_t LineStreamDriver::local_port() const { return impl_->local_port(); }

}  // namespace lphi::drivers
