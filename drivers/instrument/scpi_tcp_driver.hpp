// ScpiTcpDriver: polls an instrument that speaks SCPI (IEEE 488.2 message
// framing) over a raw TCP socket.
//
// On every connect it asks the identity query (*IDN? by default) and reports
// the answer through DriverHooks::on_identity and DriverStatus::identity.
// Then, every poll_interval (on a fixed schedule; ticks a slow poll overran
// are skipped and counted as missed_polls), it sends the configured queries
// one after the other, each waiting for its one reply line, and makes one
// reading from the fields of all replies. The reading's time is the arrival
// time of the poll's last reply (system clock) unless a field maps to time_s.
//
// Faults:
// - no complete reply within reply_timeout: the conversation is out of step
//   (a late reply would be taken for the answer to the next query), so the
//   connection is closed and made again after the backoff; counted as a reply
//   timeout, or as a partial line when part of a reply had come.
// - a reply that does not parse as configured: counted as garbage; the
//   poll's reading is not made; the connection stays (framing is in step).
// - lines nobody asked for (e.g. an instrument that answers twice) are
//   discarded as garbage before the next query is sent.
#pragma once

#include <memory>
#include <string>

#include "drivers/instrument/driver_config.hpp"
#include "drivers/instrument/instrument_driver.hpp"

namespace lphi::drivers {

class ScpiTcpDriver final : public InstrumentDriver {
 public:
  // Nothing (and `error` set) when the config does not validate or the sink is missing.
  static std::unique_ptr<ScpiTcpDriver> create(boost::asio::io_context& io, ScpiTcpConfig config,
                                               DriverHooks hooks, std::string* error);
  ~ScpiTcpDriver() override;

  void start() override;
  void stop() override;
  DriverStatus status() const override;

  class Impl;

 private:
  explicit ScpiTcpDriver(std::shared_ptr<Impl> impl);
  std::shared_ptr<Impl> impl_;
};

}  // namespace lphi::drivers
