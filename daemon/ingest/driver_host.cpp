#include "daemon/ingest/driver_host.hpp"

#include <spdlog/spdlog.h>

#include <chrono>

#include "daemon/health/failed_parts.hpp"
#include "drivers/instrument/line_stream_driver.hpp"
#include "drivers/instrument/scpi_tcp_driver.hpp"

namespace lphi::ingest {

using nlohmann::json;

namespace {

drivers::DriverHooks hooks_for(const std::string& source, IngestServer& server) {
  drivers::DriverHooks hooks;
  hooks.sink = [&server, source](protocol::Readings&& readings) {
    return server.offer_driver_readings(source, std::move(readings));
  };
  hooks.on_identity = [&server, source](std::string_view identity) {
    server.offer_identity(source, std::string(identity));
  };
  hooks.log = [source](drivers::LogLevel level, std::string_view message) {
    switch (level) {
      case drivers::LogLevel::debug: spdlog::debug("driver {}: {}", source, message); break;
      case drivers::LogLevel::info: spdlog::info("driver {}: {}", source, message); break;
      case drivers::LogLevel::warning: spdlog::warn("driver {}: {}", source, message); break;
      case drivers::LogLevel::error: spdlog::error("driver {}: {}", source, message); break;
    }
  };
  return hooks;
}

double seconds_since(std::chrono::system_clock::time_point then) {
  return std::chrono::duration<double>(std::chrono::system_clock::now() - then).count();
}

}  // namespace

DriverHost::DriverHost() : work_(boost::asio::make_work_guard(io_)) {}

DriverHost::~DriverHost() { stop(); }

Status DriverHost::create(const config::Config& config,
                                 const std::map<std::string, store::SourceState>& sources,
                                 IngestServer& server) {
  for (const auto& src : config.sources) {
    if (src.driver == config::DriverType::none) continue;
    const auto state = sources.find(src.name);
    // The next seq after the store's highest, as a sender learns it from hello.
    const std::int64_t first_seq =
        state != sources.end() && state->second.highest_seq ? *state->second.highest_seq + 1 : 0;
    Entry entry;
    entry.source = src.name;
    entry.type = src.driver;
    std::string error;
    if (src.driver == config::DriverType::scpi_tcp) {
      auto c = src.scpi_tcp;
      c.outlet.first_seq = first_seq;
      entry.address = c.connection.host + ":" + std::to_string(c.connection.port);
      entry.driver = drivers::ScpiTcpDriver::create(io_, std::move(c), hooks_for(src.name, server), &error);
    } else {
      auto c = src.line_stream;
      c.outlet.first_seq = first_seq;
      entry.address = c.connection.host + ":" + std::to_string(c.connection.port);
      entry.driver = drivers::LineStreamDriver::create(io_, std::move(c), hooks_for(src.name, server), &error);
    }
    if (!entry.driver) {
      return Status::invalid_input("source " + src.name + ": cannot make its " +
                                    std::string(config::driver_type_name(src.driver)) + " driver: " + error);
    }
    spdlog::info("source {}: {} driver for {}, first seq {}", src.name,
                 config::driver_type_name(src.driver), entry.address, first_seq);
    drivers_.push_back(std::move(entry));
  }
  return Status::success();
}

void DriverHost::start(health::FailedParts* failed_parts) {
  if (thread_.joinable() || stopped_) return;
  for (auto& e : drivers_) e.driver->start();
  // The thread's entry: the exception barrier around the io_context.
  thread_ = std::thread([this, failed_parts] {
    health::run_guarded(failed_parts, "drivers", [this] { io_.run(); });
  });
}

void DriverHost::stop() {
  if (stopped_) return;
  stopped_ = true;
  for (auto& e : drivers_) e.driver->stop();
  work_.reset();
  io_.stop();
  if (thread_.joinable()) thread_.join();
  drivers_.clear();  // after the io_context stopped running, as the drivers require
}

json DriverHost::status_json() const {
  json out = json::array();
  for (const auto& e : drivers_) {
    const drivers::DriverStatus s = e.driver->status();
    const auto& f = s.faults;
    json j = {{"source", e.source},
              {"driver", config::driver_type_name(e.type)},
              {"address", e.address},
              {"state", drivers::state_name(s.state)},
              {"identity", s.identity},
              {"last_error", s.last_error},
              {"faults",
               {{"connect_failures", f.connect_failures},
                {"connect_timeouts", f.connect_timeouts},
                {"reply_timeouts", f.reply_timeouts},
                {"garbage_replies", f.garbage_replies},
                {"partial_lines", f.partial_lines},
                {"overlong_lines", f.overlong_lines},
                {"disconnects", f.disconnects},
                {"reconnects", f.reconnects}}},
              {"polls", s.polls},
              {"missed_polls", s.missed_polls},
              {"readings", s.readings},
              {"delivered", s.delivered},
              {"buffered", s.buffered},
              {"dropped_readings", s.dropped_readings},
              {"sink_refusals", s.sink_refusals},
              {"next_seq", s.next_seq}};
    j["last_reading_age_s"] = s.last_reading_at ? json(seconds_since(*s.last_reading_at)) : json(nullptr);
    j["connected_for_s"] = s.connected_since ? json(seconds_since(*s.connected_since)) : json(nullptr);
    out.push_back(std::move(j));
  }
  return out;
}

}  // namespace lphi::ingest
