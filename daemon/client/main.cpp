// lphi, the terminal client: offline analysis (fit, dephasing, synth) and the
// commands that talk to a running lphid.

#include <exception>
#include <iostream>
#include <stdexcept>

#include <CLI/CLI.hpp>

#include "daemon/client/commands.hpp"
#include "daemon/client/daemon_commands.hpp"
#include "daemon/client/exit_codes.hpp"
#include "daemon/client/live_commands.hpp"

#ifndef LPHI_VERSION
#error "LPHI_VERSION must be defined by the build (the project's version)"
#endif

int main(int argc, char** argv) {
  namespace client = lphi::client;
  CLI::App app{
      "lphi: the phase-coherence length from weak-localization magnetoconductance.\n"
      "Offline: fit a sweep, fit L_phi(T), make synthetic data. With lphid: send, export, status,\n"
      "sweeps, fits, verdict, alerts, ack, watch, replay."};
  app.set_version_flag("--version", std::string("lphi ") + LPHI_VERSION);
  app.require_subcommand(1);

  int exit_code = client::exit_ok;
  client::register_fit_command(app, &exit_code);
  client::register_dephasing_command(app, &exit_code);
  client::register_synth_commands(app, &exit_code);
  client::register_daemon_commands(app, &exit_code);
  client::register_live_commands(app, &exit_code);

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    // Help and version end parsing with exit code 0; everything else is a usage error.
    const int code = app.exit(e);
    return code == 0 ? client::exit_ok : client::exit_bad_input;
  } catch (const std::invalid_argument& e) {
    std::cerr << "lphi: " << e.what() << '\n';
    return client::exit_bad_input;
  } catch (const std::exception& e) {
    std::cerr << "lphi: internal error: " << e.what() << '\n';
    return client::exit_failure;
  }
  return exit_code;
}
