#include "daemon/client/interrupt.hpp"

#include <csignal>
#include <unistd.h>

namespace lphi::client {

namespace {

volatile std::sig_atomic_t signals_seen = 0;

extern "C" void on_signal(int signal_number) {
  if (signals_seen > 0) _exit(128 + signal_number);
  signals_seen = signals_seen + 1;
}

}  // namespace

void install_interrupt_handler() {
  struct sigaction action {};
  action.sa_handler = on_signal;
  sigemptyset(&action.sa_mask);
  action.sa_flags = 0;  // no SA_RESTART: a blocking poll returns with EINTR
  sigaction(SIGINT, &action, nullptr);
  sigaction(SIGTERM, &action, nullptr);
}

bool interrupted() { return signals_seen > 0; }

}  // namespace lphi::client
