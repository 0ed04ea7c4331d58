// The tests' one launcher (child_process.hpp) and temporary directory
// (temp_dir.hpp), on the system's own /bin/sh: arguments, environment,
// standard input, captured output, exit statuses and the bounded wait.
#include <gtest/gtest.h>

#include <signal.h>

#include <filesystem>

#include "tests/support/child_process.hpp"
#include "tests/support/temp_dir.hpp"

namespace lphi::testing {
namespace {

using namespace std::chrono_literals;

Launch shell(const std::string& script) {
  Launch l;
  l.args = {"/bin/sh", "-c", script, "sh", "first arg"};
  return l;
}

TEST(ChildProcess, PassesArgumentsEnvironmentAndInputAndCapturesOutput) {
  Launch l = shell("printf '%s|%s|' \"$1\" \"$LPHI_TEST_VALUE\"; cat; echo oops >&2; exit 3");
  l.env = {"LPHI_TEST_VALUE=42"};
  l.stdin_text = "from stdin";
  const ProgramResult r = run_program(l, 60s);
  EXPECT_EQ(r.exit_code, 3);
  EXPECT_EQ(r.out, "first arg|42|from stdin");
  EXPECT_EQ(r.err, "oops\n");
}

TEST(ChildProcess, StdinFromAFileOrNothing) {
  TempDir dir;
  Launch from_file = shell("cat");
  from_file.stdin_path = dir.write("in.txt", "file text");
  EXPECT_EQ(run_program(from_file, 60s).out, "file text");
  EXPECT_EQ(run_program(shell("cat"), 60s).out, "");  // /dev/null
}

TEST(ChildProcess, ASignalAndATimeoutAreTold) {
  ChildProcess child;
  ASSERT_TRUE(child.start(shell("exec sleep 60")));
  EXPECT_TRUE(child.running());
  EXPECT_FALSE(child.poll());
  child.signal(SIGTERM);
  EXPECT_EQ(child.wait(60s), 128 + SIGTERM);
  EXPECT_FALSE(child.running());

  // A program that outlives the bound is killed and reported as -1.
  ChildProcess stuck;
  ASSERT_TRUE(stuck.start(shell("exec sleep 60")));
  EXPECT_EQ(stuck.wait(50ms), -1);
  EXPECT_FALSE(stuck.running());
}

TEST(ChildProcess, AMissingProgramDoesNotStart) {
  ChildProcess child;
  Launch l;
  l.args = {"/nonexistent/lphi-no-such-program"};
  EXPECT_FALSE(child.start(l));
  EXPECT_EQ(run_program(l, 1s).exit_code, -1);
}

TEST(TempDir, IsPrivateAndRemovedWithItsFiles) {
  std::string path;
  {
    TempDir dir;
    path = dir.path();
    EXPECT_TRUE(std::filesystem::is_directory(path));
    EXPECT_EQ(std::filesystem::status(path).permissions() & std::filesystem::perms::others_all,
              std::filesystem::perms::none);
    EXPECT_EQ(dir.write("a.txt", "x"), dir.file("a.txt"));
    EXPECT_EQ(read_text_file(dir.file("a.txt")), "x");
  }
  EXPECT_FALSE(std::filesystem::exists(path));
}

}  // namespace
}  // namespace lphi::testing
