// The wall clock as the readings' time: seconds since the Unix epoch, as
// lphid and the senders stamp readings. For tests that make readings "now".
// Header only; safe from any thread.
#pragma once

#include <chrono>

namespace lphi::testing {

inline double unix_now() {
  return std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
}

}  // namespace lphi::testing
