// A sink for the driver tests that keeps what it accepted, so a test can
// check that every reading handed over is there, in order, once.
#pragma once

#include <gtest/gtest.h>

#include <vector>

#include "schema/protocol/reading.hpp"
#include "drivers/instrument/instrument_driver.hpp"

namespace lphi::drivers::testing {

template <class R>
struct Collector {
  std::vector<R> got;
  std::vector<std::chrono::steady_clock::time_point> arrived;
  bool refuse = false;
  ReadingSink sink() {
    return [this](protocol::Readings&& batch) {
      if (refuse) return false;
      for (auto& r : std::get<std::vector<R>>(batch)) {
        got.push_back(r);
        arrived.push_back(std::chrono::steady_clock::now());
      }
      return true;
    };
  }
  // Sequence numbers start at `first` and have no gap and no repeat.
  void expect_contiguous_from(std::int64_t first) const {
    for (std::size_t i = 0; i < got.size(); ++i)
      ASSERT_EQ(got[i].seq, first + static_cast<std::int64_t>(i)) << "at reading " << i;
  }
};

}  // namespace lphi::drivers::testing
