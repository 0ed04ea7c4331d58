// InstrumentDriver: what lphid sees of every instrument driver.
//
// A driver talks to one instrument (one source, one kind of reading) over
// TCP, entirely asynchronously on a strand of the io_context it is given:
// every connect, write and read has a timer, nothing blocks, so a slow, mute
// or misbehaving instrument never holds up the io_context or another driver
// on it. A lost or refused connection is retried after an exponential
// backoff with jitter (BackoffOptions), forever, until stop().
//
// Readings leave through DriverHooks::sink (see ReadingOutlet for the
// sequence numbers and what happens under back-pressure). All hooks are
// called on the driver's strand, one at a time; they must not block.
//
// Thread safety: start(), stop() and status() may be called from any thread.
// Destroy a driver on a thread that runs its io_context, or after that
// io_context has stopped running: stop() (called by the destructor) takes
// effect at once for the hooks -- none is called after it returns when it is
// called on such a thread.
#pragma once

#include <functional>
#include <string_view>

#include "drivers/instrument/driver_status.hpp"
#include "drivers/instrument/reading_outlet.hpp"

namespace boost::asio {
class io_context;
}

namespace lphi::drivers {

enum class LogLevel { debug, info, warning, error };

struct DriverHooks {
  ReadingSink sink;                                       // required
  std::function<void(std::string_view identity)> on_identity;  // scpi-tcp, after each connect
  std::function<void(LogLevel, std::string_view message)> log;
};

class InstrumentDriver {
 public:
  virtual ~InstrumentDriver() = default;
  InstrumentDriver() = default;
  InstrumentDriver(const InstrumentDriver&) = delete;
  InstrumentDriver& operator=(const InstrumentDriver&) = delete;

  virtual void start() = 0;
  virtual void stop() = 0;
  virtual DriverStatus status() const = 0;
};

}  // namespace lphi::drivers
