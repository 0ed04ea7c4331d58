// Sub-commands of lphi for lphid's live analysis:
//
//   lphi sweeps   the field sweeps lphid found          {"type":"sweeps"}
//   lphi fits     the fit of each sweep                  {"type":"fits"}
//   lphi verdict  L_phi(T) and the saturation verdict    {"type":"verdict"}
//   lphi alerts   live (or, with --all, every) alert     {"type":"alerts"}
//   lphi ack ID   acknowledge an alert                   {"type":"ack"}
//   lphi watch    follow the event socket
//   lphi replay   stream a recorded cooldown into lphid
//
// `lphi alerts --sample NAME` shows the alerts whose subject is the sample
// or one of its three sources.
//
// Exit codes (exit_codes.hpp): 0 done; 2 bad input (options, a bad CSV, an
// alert id lphid cannot acknowledge: unknown or already cleared); 3 lphid
// does not answer within the timeout; 4 no such data: an unknown sample, no
// sweeps / fits stored yet (`lphi sweeps` and `lphi fits` with an empty
// answer; an empty list of alerts is a normal state and exits 0), or
// `lphi watch --count N` timed out before N events; 1 anything else (lphid
// refused for another reason, readings rejected, replay interrupted, the
// analysis stopped or made no progress for --stall-s).
#pragma once

#include <CLI/CLI.hpp>

namespace lphi::client {

// Adds every live sub-command to app; each callback sets *exit_code.
void register_live_commands(CLI::App& app, int* exit_code);

void register_query_commands(CLI::App& app, int* exit_code);   // sweeps, fits, verdict, alerts, ack
void register_watch_command(CLI::App& app, int* exit_code);
void register_replay_command(CLI::App& app, int* exit_code);

}  // namespace lphi::client
