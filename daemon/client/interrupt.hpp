// SIGINT (and SIGTERM) for the long-running sub-commands (watch, replay):
// the first signal asks the command to stop cleanly, a later one ends the
// process at once with the conventional status 128 + signal.
#pragma once

namespace lphi::client {

// Installs the handlers (idempotent).
void install_interrupt_handler();
// True once a signal arrived.
bool interrupted();

}  // namespace lphi::client
