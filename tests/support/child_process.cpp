#include "tests/support/child_process.hpp"

#include <fcntl.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <fstream>
#include <map>
#include <sstream>
#include <thread>

extern char** environ;

namespace lphi::testing {

using Clock = std::chrono::steady_clock;

namespace {

int decode(int status) {
  if (WIFEXITED(status)) return WEXITSTATUS(status);
  if (WIFSIGNALED(status)) return 128 + WTERMSIG(status);
  return -1;
}

// This process's environment with `extra` ("NAME=value") set over it.
std::vector<std::string> environment(const std::vector<std::string>& extra) {
  std::map<std::string, std::string> vars;
  for (char** e = environ; e != nullptr && *e != nullptr; ++e) {
    const std::string entry(*e);
    vars[entry.substr(0, entry.find('='))] = entry;
  }
  for (const auto& entry : extra) vars[entry.substr(0, entry.find('='))] = entry;
  std::vector<std::string> out;
  for (auto& [name, entry] : vars) out.push_back(std::move(entry));
  return out;
}

std::vector<char*> pointers(std::vector<std::string>& strings) {
  std::vector<char*> out;
  for (auto& s : strings) out.push_back(s.data());
  out.push_back(nullptr);
  return out;
}

}  // namespace

std::string read_text_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

ChildProcess::~ChildProcess() { kill_hard(); }

bool ChildProcess::start(const Launch& launch) {
  if (pid_ > 0 || launch.args.empty()) return false;
  stdout_path_ = launch.stdout_path;
  stderr_path_ = launch.stderr_path;
  std::string stdin_path = launch.stdin_path.empty() ? "/dev/null" : launch.stdin_path;
  if (stdout_path_.empty() || stderr_path_.empty() || launch.stdin_text) {
    capture_.emplace();
    if (stdout_path_.empty()) stdout_path_ = capture_->file("stdout");
    if (stderr_path_.empty()) stderr_path_ = capture_->file("stderr");
    if (launch.stdin_text) stdin_path = capture_->write("stdin", *launch.stdin_text);
  }
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_addopen(&actions, 0, stdin_path.c_str(), O_RDONLY, 0);
  posix_spawn_file_actions_addopen(&actions, 1, stdout_path_.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
  posix_spawn_file_actions_addopen(&actions, 2, stderr_path_.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
  std::vector<std::string> args = launch.args;
  std::vector<std::string> env = environment(launch.env);
  std::vector<char*> argv = pointers(args);
  std::vector<char*> envp = pointers(env);
  pid_t pid = -1;
  const int rc = posix_spawn(&pid, argv[0], &actions, nullptr, argv.data(), envp.data());
  posix_spawn_file_actions_destroy(&actions);
  if (rc != 0) return false;
  pid_ = pid;
  return true;
}

std::optional<int> ChildProcess::poll() {
  if (pid_ <= 0) return std::nullopt;
  int status = 0;
  if (::waitpid(pid_, &status, WNOHANG) != pid_) return std::nullopt;
  pid_ = -1;
  return decode(status);
}

int ChildProcess::wait(std::chrono::milliseconds timeout) {
  if (pid_ <= 0) return -1;
  const auto deadline = Clock::now() + timeout;
  while (Clock::now() < deadline) {
    if (auto status = poll()) return *status;
    std::this_thread::sleep_for(std::chrono::milliseconds(5));
  }
  kill_hard();
  return -1;
}

void ChildProcess::signal(int signal_number) {
  if (pid_ > 0) ::kill(pid_, signal_number);
}

void ChildProcess::kill_hard() {
  if (pid_ <= 0) return;
  ::kill(pid_, SIGKILL);
  int status = 0;
  while (::waitpid(pid_, &status, 0) < 0 && errno == EINTR) {
  }
  pid_ = -1;
}

std::string ChildProcess::stdout_text() const { return read_text_file(stdout_path_); }
std::string ChildProcess::stderr_text() const { return read_text_file(stderr_path_); }

ProgramResult run_program(const Launch& launch, std::chrono::milliseconds timeout) {
  ChildProcess child;
  ProgramResult result;
  if (!child.start(launch)) {
    result.err = "cannot start " + (launch.args.empty() ? std::string("(nothing)") : launch.args[0]);
    return result;
  }
  result.exit_code = child.wait(timeout);
  result.out = child.stdout_text();
  result.err = child.stderr_text();
  return result;
}

}  // namespace lphi::testing
