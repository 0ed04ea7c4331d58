// lphi-sim's server: one TCP acceptor per simulated instrument, one small
// session per connection, all on one io_context thread; a periodic tick
// applies the faults, writes the truth file and ends the run.
//
// Simulated time is t = speed * (wall-clock seconds since run() started).
// The instruments report epoch_start_s + t as their clock (0 by default).
// The run ends at --duration-s simulated seconds if given, otherwise at the
// end of the programme, unless `hold` is set: then lphi-sim keeps serving the
// programme's last state (zero field at the last plateau's temperature) until
// stop() or a signal.
//
// Lines are '\n'-terminated (a trailing '\r' is ignored); a line longer than
// scpi::kMaxLineBytes is discarded up to its terminator and answered with
// "ERR -223,...". A client that does not read its replies is disconnected
// when more than kMaxPendingReplies are waiting.
#pragma once

#include <memory>
#include <string>

#include "drivers/sim/scenario.hpp"

namespace lphi::sim {

struct ServerOptions {
  double speed = 1.0;               // simulated seconds per wall-clock second
  double epoch_start_s = 0.0;       // added to reported times; 0: simulated seconds from 0
  std::string bind = "127.0.0.1";
  std::string truth_path;           // empty: no truth file
  std::string ports_file;           // empty: none; JSON {"lockin":p,"thermometer":p,"magnet":p}
  double duration_s = 0.0;          // simulated; 0: the programme's end
  bool hold = false;                // keep serving after the programme ends
  bool handle_signals = true;       // SIGINT/SIGTERM stop the run cleanly
  bool announce = true;             // print the ports on stdout
};

class SimServer {
 public:
  SimServer(Scenario scenario, ServerOptions options);
  ~SimServer();
  SimServer(const SimServer&) = delete;
  SimServer& operator=(const SimServer&) = delete;

  // Binds the acceptors and writes the ports file. Empty on success, else
  // the reason (e.g. "lockin: cannot listen on 127.0.0.1:5025: Address already in use").
  std::string open();
  int port(Instrument i) const;

  // Serves until the run ends or stop() is called. Returns "" or an error.
  std::string run();
  void stop();  // safe from any thread

  struct Impl;  // the io_context, acceptors and sessions (server.cpp)

 private:
  std::unique_ptr<Impl> impl_;
};

}  // namespace lphi::sim
