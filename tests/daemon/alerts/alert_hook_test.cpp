// The command hook with real child processes: small /bin/sh scripts written
// into a temp dir. Labelled integration: it starts processes.
#include <signal.h>
#include <sys/stat.h>

#include <cerrno>
#include <fstream>
#include <sstream>
#include <thread>

#include "daemon/alerts/hook_runner.hpp"
#include "tests/daemon/alerts/alert_test_support.hpp"

namespace lphi::alerts {
namespace {

using testing::good_fit;
using testing::make_engine;

std::string read_file(const std::string& path) {
  std::ifstream in(path);
  std::stringstream s;
  s << in.rdbuf();
  return s.str();
}

class Hook : public ::testing::Test {
 protected:
  lphi::testing::TempDir dir;

  std::string script(const std::string& name, const std::string& body) {
    const std::string path = dir.file(name);
    std::ofstream(path) << "#!/bin/sh\n" << body << "\n";
    ::chmod(path.c_str(), 0755);
    return path;
  }

  AlertConfig with_hook(std::vector<std::string> argv) {
    AlertConfig c;
    c.hook_command = std::move(argv);
    c.hook_timeout_s = 5.0;
    return c;
  }

  static FitFact failed_fit(std::int64_t sweep, double t, std::string sample = "film") {
    FitFact f = good_fit(sweep, t, std::move(sample));
    f.ok = false;
    f.error = "singular Jacobian";
    return f;
  }
};

TEST_F(Hook, GetsTheAlertJsonOnStdin) {
  const std::string out = dir.file("got.json");
  // The script's arguments arrive as given (no shell in between: the space
  // and the quote stay inside one argument).
  const std::string prog = script("hook.sh", "cat > \"$1\"; printf '%s' \"$2\" > \"$1.arg\"; echo logged line");
  auto e = make_engine(dir.file("lphi.db"), with_hook({prog, out, "it's one arg"}));
  e->on_fit(failed_fit(1, 100.0));
  ASSERT_TRUE(e->wait_hook_idle(10.0));
  const auto got = nlohmann::json::parse(read_file(out), nullptr, false);
  ASSERT_FALSE(got.is_discarded()) << read_file(out);
  EXPECT_EQ(got["rule"], "fit-failed");
  EXPECT_EQ(got["change"], "raised");
  EXPECT_EQ(got["subject"], "film");
  EXPECT_EQ(got["id"], e->list(false).at(0).id);
  EXPECT_EQ(read_file(out + ".arg"), "it's one arg");
  const auto c = e->counters();
  EXPECT_EQ(c.hook_runs, 1u);
  EXPECT_EQ(c.hook_failures, 0u);
}

TEST_F(Hook, HangingHookIsKilledAndTheEngineKeepsAnswering) {
  const std::string pid_file = dir.file("pid");
  // exec keeps the pid, so the file names the process that must die.
  const std::string prog = script("hang.sh", "echo $$ > \"$1\"; exec sleep 1000");
  AlertConfig c = with_hook({prog, pid_file});
  c.hook_timeout_s = 0.5;
  auto e = make_engine(dir.file("lphi.db"), c);
  e->on_fit(failed_fit(1, 100.0));
  // While the hook hangs, the engine takes facts and answers requests.
  for (int i = 0; i < 5; ++i) {
    FitFact f = failed_fit(2 + i, 200.0 + i, "wire" + std::to_string(i));
    e->on_fit(f);
    const auto reply = e->handle_request({{"type", "alerts"}});
    EXPECT_EQ(reply["type"], "alerts");
  }
  EXPECT_EQ(e->list(false).size(), 6u);
  ASSERT_TRUE(e->wait_hook_idle(60.0));
  const auto counters = e->counters();
  EXPECT_EQ(counters.hook_runs, 6u);
  EXPECT_EQ(counters.hook_timeouts, 6u);
  EXPECT_EQ(counters.hook_failures, 6u);
  const pid_t pid = static_cast<pid_t>(std::stol(read_file(pid_file)));
  EXPECT_EQ(::kill(pid, 0), -1) << "the hung hook " << pid << " is still there";
  EXPECT_EQ(errno, ESRCH);
}

TEST_F(Hook, FailingHooksAreCounted) {
  {
    auto e = make_engine(dir.file("a.db"), with_hook({script("fail.sh", "echo broken >&2; exit 3")}));
    e->on_fit(failed_fit(1, 100.0));
    ASSERT_TRUE(e->wait_hook_idle(10.0));
    EXPECT_EQ(e->counters().hook_failures, 1u);
    EXPECT_EQ(e->counters().hook_runs, 1u);
  }
  {
    auto e = make_engine(dir.file("b.db"), with_hook({dir.file("no-such-program")}));
    e->on_fit(failed_fit(1, 100.0));
    ASSERT_TRUE(e->wait_hook_idle(10.0));
    EXPECT_EQ(e->counters().hook_failures, 1u);
    EXPECT_EQ(e->counters().hook_runs, 0u);
    EXPECT_EQ(e->list(false).size(), 1u);
  }
  {
    // Exits without reading stdin: no SIGPIPE for us.
    auto e = make_engine(dir.file("c.db"), with_hook({script("deaf.sh", "exit 0")}));
    e->on_fit(failed_fit(1, 100.0));
    ASSERT_TRUE(e->wait_hook_idle(10.0));
    EXPECT_EQ(e->counters().hook_failures, 0u);
  }
}

TEST_F(Hook, RateLimitDropsAndCounts) {
  const std::string out = dir.file("calls");
  AlertConfig c = with_hook({script("count.sh", "cat > /dev/null; echo call >> \"$1\""), out});
  c.hook_max_per_minute = 2;
  auto e = make_engine(dir.file("lphi.db"), c);
  for (int i = 0; i < 5; ++i) e->on_fit(failed_fit(i, 100.0 + i, "sample" + std::to_string(i)));
  ASSERT_TRUE(e->wait_hook_idle(10.0));
  const auto counters = e->counters();
  EXPECT_EQ(counters.hook_runs, 2u);
  EXPECT_EQ(counters.hook_rate_limited, 3u);
  EXPECT_EQ(read_file(out), "call\ncall\n");
  EXPECT_EQ(e->list(false).size(), 5u);  // the alerts themselves are all there
}

TEST_F(Hook, BoundedQueueDropsAndCounts) {
  const std::string gate = dir.file("gate");
  // Each run waits until the gate file exists (bounded by the timeout).
  HookRunner runner({script("wait.sh", "cat > /dev/null; while [ ! -e \"$1\" ]; do sleep 0.05; done"), gate},
                    20.0, 1000, 2);
  for (int i = 0; i < 6; ++i) {
    runner.submit("{}");
    if (i == 0) {
      // Let the first one start, so that exactly two wait in the queue.
      for (int k = 0; k < 3000 && runner.counters().runs == 0; ++k) {
        std::this_thread::sleep_for(std::chrono::milliseconds(10));
      }
      ASSERT_EQ(runner.counters().runs, 1u) << "the first run never started";
    }
  }
  std::ofstream(gate) << "open\n";
  ASSERT_TRUE(runner.wait_idle(20.0));
  const auto counters = runner.counters();
  EXPECT_EQ(counters.runs, 3u);        // the running one and the two queued
  EXPECT_EQ(counters.queue_full, 3u);
  EXPECT_EQ(counters.failures, 0u);
}

}  // namespace
}  // namespace lphi::alerts
