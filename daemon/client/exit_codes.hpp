// Exit codes of the lphi terminal client, shared by every sub-command.
#pragma once

namespace lphi::client {

inline constexpr int exit_ok = 0;
inline constexpr int exit_failure = 1;      // ran, but the outcome is negative (e.g. readings rejected)
inline constexpr int exit_bad_input = 2;    // usage error or bad input data
inline constexpr int exit_unreachable = 3;  // the daemon could not be reached
inline constexpr int exit_no_data = 4;      // the daemon answered, but has no such data
inline constexpr int exit_no_sweeps = 5;    // lphi replay: analysed, but the sample has no sweeps (says why)

}  // namespace lphi::client
