// The exception barrier (health::run_guarded) on real threads: an exception
// that leaves a thread's body is recorded as that part's failure instead of
// ending the process, and a body that returns records nothing.
#include <gtest/gtest.h>

#include <stdexcept>
#include <thread>
#include <vector>

#include "daemon/health/failed_parts.hpp"

namespace {

using lphi::health::FailedParts;
using lphi::health::run_guarded;

TEST(FailedParts, AThrowingThreadIsRecordedAndTheOthersFinish) {
  FailedParts parts;
  std::vector<int> done(4, 0);
  std::vector<std::thread> threads;
  for (int i = 0; i < 4; ++i) {
    threads.emplace_back([&, i] {
      run_guarded(&parts, "sample:s" + std::to_string(i), [&] {
        if (i == 2) throw std::runtime_error("bad row in sweep 7");
        done[static_cast<std::size_t>(i)] = 1;
      });
    });
  }
  for (auto& t : threads) t.join();
  EXPECT_EQ(done, (std::vector<int>{1, 1, 0, 1}));
  const auto list = parts.list();
  ASSERT_EQ(list.size(), 1u);
  EXPECT_EQ(list[0].part, "sample:s2");
  EXPECT_EQ(list[0].error, "bad row in sweep 7");
  EXPECT_GT(list[0].at_unix, 0.0);
  EXPECT_EQ(parts.failures(), 1u);
}

TEST(FailedParts, ANonStandardExceptionIsCaughtAndNamed) {
  FailedParts parts;
  const bool ok = run_guarded(&parts, "drivers", [] { throw 42; });
  EXPECT_FALSE(ok);
  ASSERT_EQ(parts.list().size(), 1u);
  EXPECT_NE(parts.list()[0].error.find("not a std::exception"), std::string::npos);
  EXPECT_TRUE(run_guarded(&parts, "control", [] {}));
  EXPECT_EQ(parts.list().size(), 1u);
}

TEST(FailedParts, APartThatFailsAgainKeepsOneEntryAndTheListIsBounded) {
  FailedParts parts;
  for (int i = 0; i < 3; ++i) {
    run_guarded(&parts, "alert-hook", [i] { throw std::runtime_error("run " + std::to_string(i)); });
  }
  ASSERT_EQ(parts.list().size(), 1u);
  EXPECT_EQ(parts.list()[0].error, "run 2");
  for (std::size_t i = 0; i < FailedParts::max_parts + 10; ++i) parts.mark("part" + std::to_string(i), "x");
  EXPECT_EQ(parts.list().size(), FailedParts::max_parts);
  EXPECT_EQ(parts.failures(), 3u + FailedParts::max_parts + 10);
}

}  // namespace
