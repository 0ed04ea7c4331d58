// DriverHost: runs lphid's instrument drivers (drivers/instrument/) on one
// Boost.Asio io_context thread and connects them to the IngestServer.
//
// Every configured source with a `driver` gets one driver. Its readings go to
// IngestServer::offer_driver_readings (the same checks and store path as a
// batch from the ingest socket; a refusal there makes the driver buffer), its
// identity answers to IngestServer::offer_identity, its log lines to lphid's
// log. Sequence numbers continue from the store: a driver starts at one past
// the highest seq stored for its source.
//
// Nothing a driver does can block lphid: the drivers share their own thread,
// and every operation there is asynchronous with a timeout. status_json() may
// be called from any thread.
#pragma once

#include <boost/asio/executor_work_guard.hpp>
#include <boost/asio/io_context.hpp>
#include <map>
#include <memory>
#include <nlohmann/json.hpp>
#include <string>
#include <thread>
#include <vector>

#include "daemon/config/config.hpp"
#include "daemon/ingest/ingest_server.hpp"
#include "daemon/store/writer.hpp"
#include "drivers/instrument/instrument_driver.hpp"

namespace lphi::health {
class FailedParts;
}  // namespace lphi::health

namespace lphi::ingest {

class DriverHost {
 public:
  DriverHost();
  ~DriverHost();  // stop()
  DriverHost(const DriverHost&) = delete;
  DriverHost& operator=(const DriverHost&) = delete;

  // Creates the drivers of the sources that have one. `sources` are the
  // registered sources' states (for the next seq). Fails, naming the source,
  // when a driver cannot be made (e.g. a listen address that cannot be bound).
  Status create(const config::Config& config,
                       const std::map<std::string, store::SourceState>& sources,
                       IngestServer& server);
  std::size_t size() const { return drivers_.size(); }

  // Starts the drivers and their thread. An exception that escapes a
  // driver's handler ends the io thread: it is recorded in failed_parts (may
  // be null) as the part "drivers", every driver stops reading (their status
  // keeps the last state), and lphid goes on with the other sources.
  void start(health::FailedParts* failed_parts = nullptr);
  // Stops the drivers and joins the thread. Idempotent.
  void stop();

  // One object per driver: source, driver type, state, identity, last reading
  // age, fault counters and throughput counters.
  nlohmann::json status_json() const;

 private:
  struct Entry {
    std::string source;
    config::DriverType type = config::DriverType::none;
    std::string address;
    std::unique_ptr<drivers::InstrumentDriver> driver;
  };
  boost::asio::io_context io_;
  boost::asio::executor_work_guard<boost::asio::io_context::executor_type> work_;
  std::vector<Entry> drivers_;
  std::thread thread_;
  bool stopped_ = false;
};

}  // namespace lphi::ingest
