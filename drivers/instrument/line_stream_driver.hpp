// LineStreamDriver: reads an instrument or gateway that pushes one reading
// per line, as CSV (columns by index) or as one JSON object per line (values
// by key).
//
// In connect mode it connects to host:port (and reconnects with backoff); in
// listen mode it binds host:port when created and serves one peer at a time,
// taking the next peer when the current one goes away. Blank lines and lines
// starting with '#' are skipped (and counted). The reading's time is the
// line's arrival time (system clock) unless a field maps to time_s.
//
// Faults: a line that does not parse is counted as garbage and skipped; no
// line for silence_timeout ends the connection (a reply timeout, or a partial
// line when a line had begun) and a new one is made; from stall_after the
// status shows the driver as stalled.
#pragma once

#include <cstdint>
#include <memory>
#include <string>

#include "drivers/instrument/driver_config.hpp"
#include "drivers/instrument/instrument_driver.hpp"

namespace lphi::drivers {

class LineStreamDriver final : public InstrumentDriver {
 public:
  // Nothing (and `error` set) when the config does not validate, the sink is
  // missing, or (listen mode) the address cannot be bound.
  static std::unique_ptr<LineStreamDriver> create(boost::asio::io_context& io,
                                                  LineStreamConfig config, DriverHooks hooks,
                                                  std::string* error);
  ~LineStreamDriver() override;

  void start() override;
  void stop() override;
  DriverStatus status() const override;
  // Listen mode: the port actually bound (useful with port 0); else 0.
  std::uint16_t local_port() const;

  class Impl;

 private:
  explicit LineStreamDriver(std::shared_ptr<Impl> impl);
  std::shared_ptr<Impl> impl_;
};

}  // namespace lphi::drivers
