#include "daemon/alerts/hook_runner.hpp"

#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>

#include <spdlog/spdlog.h>

#include "daemon/health/failed_parts.hpp"

extern char** environ;

namespace lphi::alerts {

namespace {

using Clock = std::chrono::steady_clock;

constexpr std::chrono::milliseconds kill_grace{2000};
constexpr std::size_t max_logged_bytes = 64 * 1024;  // of one run's output

class Fd {
 public:
  Fd() = default;
  explicit Fd(int fd) : fd_(fd) {}
  ~Fd() { reset(); }
  Fd(const Fd&) = delete;
  Fd& operator=(const Fd&) = delete;
  int get() const { return fd_; }
  void reset() {
    if (fd_ >= 0) ::close(fd_);
    fd_ = -1;
  }

 private:
  int fd_ = -1;
};

int remaining_ms(Clock::time_point deadline) {
  const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - Clock::now());
  return left.count() <= 0 ? 0 : static_cast<int>(left.count());
}

// Waits for pid until deadline; true when it was reaped (status set).
bool wait_until(pid_t pid, Clock::time_point deadline, int& status) {
  for (;;) {
    const pid_t r = ::waitpid(pid, &status, WNOHANG);
    if (r == pid) return true;
    if (r < 0 && errno != EINTR) return true;  // nothing to wait for
    if (Clock::now() >= deadline) return false;
    std::this_thread::sleep_for(std::chrono::milliseconds(10));
  }
}

}  // namespace

HookRunner::HookRunner(std::vector<std::string> argv, double timeout_s, std::int64_t max_per_minute,
                       std::size_t queue_capacity)
    : argv_(std::move(argv)),
      timeout_(static_cast<std::int64_t>(timeout_s * 1000.0)),
      max_per_minute_(max_per_minute),
      capacity_(queue_capacity) {
  thread_ = std::thread([this] { run_loop(); });
}

HookRunner::~HookRunner() {
  {
    std::lock_guard lock(mutex_);
    stopping_ = true;
  }
  abort_.store(true);
  wake_.notify_all();
  if (thread_.joinable()) thread_.join();
}

void HookRunner::submit(std::string input) {
  {
    std::lock_guard lock(mutex_);
    if (!counters_.failed_error.empty()) {
      ++counters_.failures;
      spdlog::warn("alert hook: failed earlier ({}); this alert change is not passed on", counters_.failed_error);
      return;
    }
    const auto now = Clock::now();
    while (!accepted_.empty() && now - accepted_.front() >= std::chrono::minutes(1)) {
      accepted_.pop_front();
    }
    if (static_cast<std::int64_t>(accepted_.size()) >= max_per_minute_) {
      ++counters_.rate_limited;
      spdlog::warn("alert hook: more than {} runs in a minute, this alert change is not passed on",
                   max_per_minute_);
      return;
    }
    if (queue_.size() >= capacity_) {
      ++counters_.queue_full;
      spdlog::warn("alert hook: {} alert changes already wait for the hook, this one is dropped",
                   capacity_);
      return;
    }
    accepted_.push_back(now);
    queue_.push_back(std::move(input));
  }
  wake_.notify_one();
}

HookRunner::Counters HookRunner::counters() const {
  std::lock_guard lock(mutex_);
  return counters_;
}

bool HookRunner::wait_idle(double timeout_s) {
  std::unique_lock lock(mutex_);
  return idle_.wait_for(lock, std::chrono::duration<double>(timeout_s),
                        [this] { return queue_.empty() && !busy_; });
}

// The thread's entry: the exception barrier around the loop.
void HookRunner::run_loop() {
  std::string error = "an exception that is not a std::exception";
  const bool ok = health::run_guarded(nullptr, "alert-hook", [this, &error] {
    try {
      serve();
    } catch (const std::exception& e) {
      error = e.what();
      throw;
    }
  });
  if (ok) return;
  std::lock_guard lock(mutex_);
  ++counters_.failures;
  counters_.failed_error = error;
  queue_.clear();
  busy_ = false;
  idle_.notify_all();
}

void HookRunner::serve() {
  // A hook that exits before reading its stdin must not take lphid down
  // with SIGPIPE: this thread blocks the signal (writes then fail with EPIPE).
  sigset_t pipe_set;
  sigemptyset(&pipe_set);
  sigaddset(&pipe_set, SIGPIPE);
  pthread_sigmask(SIG_BLOCK, &pipe_set, nullptr);

  std::unique_lock lock(mutex_);
  for (;;) {
    wake_.wait(lock, [this] { return stopping_ || !queue_.empty(); });
    if (stopping_) return;
    std::string input = std::move(queue_.front());
    queue_.pop_front();
    busy_ = true;
    lock.unlock();
    run_one(input);
    lock.lock();
    busy_ = false;
    if (queue_.empty()) idle_.notify_all();
  }
}

void HookRunner::run_one(const std::string& input) {
  const std::string program = argv_.front();
  auto fail = [&](const std::string& why) {
    spdlog::error("alert hook {}: {}", program, why);
    std::lock_guard lock(mutex_);
    ++counters_.failures;
  };

  int in_pipe[2];
  int out_pipe[2];
  if (::pipe2(in_pipe, O_CLOEXEC) != 0) return fail(std::string("cannot make a pipe: ") + std::strerror(errno));
  Fd in_read(in_pipe[0]), in_write(in_pipe[1]);
  if (::pipe2(out_pipe, O_CLOEXEC) != 0) return fail(std::string("cannot make a pipe: ") + std::strerror(errno));
  Fd out_read(out_pipe[0]), out_write(out_pipe[1]);

  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_adddup2(&actions, in_read.get(), STDIN_FILENO);
  posix_spawn_file_actions_adddup2(&actions, out_write.get(), STDOUT_FILENO);
  posix_spawn_file_actions_adddup2(&actions, out_write.get(), STDERR_FILENO);
  posix_spawnattr_t attributes;
  posix_spawnattr_init(&attributes);
  // Its own process group, so that a timeout stops what it started too; the
  // default signal mask and SIGPIPE action, not this thread's.
  sigset_t empty, defaults;
  sigemptyset(&empty);
  sigemptyset(&defaults);
  sigaddset(&defaults, SIGPIPE);
  posix_spawnattr_setpgroup(&attributes, 0);
  posix_spawnattr_setsigmask(&attributes, &empty);
  posix_spawnattr_setsigdefault(&attributes, &defaults);
  posix_spawnattr_setflags(&attributes,
                           POSIX_SPAWN_SETPGROUP | POSIX_SPAWN_SETSIGMASK | POSIX_SPAWN_SETSIGDEF);

  std::vector<char*> args;
  for (const auto& a : argv_) args.push_back(const_cast<char*>(a.c_str()));
  args.push_back(nullptr);
  pid_t pid = 0;
  const int rc = ::posix_spawnp(&pid, program.c_str(), &actions, &attributes, args.data(), environ);
  posix_spawn_file_actions_destroy(&actions);
  posix_spawnattr_destroy(&attributes);
  if (rc != 0) return fail(std::string("cannot start: ") + std::strerror(rc));
  {
    std::lock_guard lock(mutex_);
    ++counters_.runs;
  }
  in_read.reset();
  out_write.reset();

  const auto deadline = Clock::now() + timeout_;
  ::fcntl(in_write.get(), F_SETFL, O_NONBLOCK);
  std::size_t written = 0;
  std::string pending_line;
  std::size_t logged = 0;
  bool output_open = true;
  auto log_output = [&](const char* data, std::size_t n) {
    pending_line.append(data, n);
    std::size_t newline = 0;
    while ((newline = pending_line.find('\n')) != std::string::npos) {
      if (logged < max_logged_bytes) spdlog::info("alert hook {}: {}", program, pending_line.substr(0, newline));
      logged += newline + 1;
      pending_line.erase(0, newline + 1);
    }
  };

  // Feed stdin and drain the output until both are done or time is up.
  while (Clock::now() < deadline && !abort_.load() && (output_open || in_write.get() >= 0)) {
    pollfd fds[2];
    nfds_t n = 0;
    if (output_open) fds[n++] = {out_read.get(), POLLIN, 0};
    if (in_write.get() >= 0) fds[n++] = {in_write.get(), POLLOUT, 0};
    const int ready = ::poll(fds, n, std::min(remaining_ms(deadline), 100));
    if (ready < 0 && errno != EINTR) break;
    for (nfds_t i = 0; i < n; ++i) {
      if (fds[i].revents == 0) continue;
      if (fds[i].fd == out_read.get()) {
        char buffer[4096];
        const ssize_t got = ::read(out_read.get(), buffer, sizeof buffer);
        if (got > 0) {
          log_output(buffer, static_cast<std::size_t>(got));
        } else if (got == 0 || (errno != EINTR && errno != EAGAIN)) {
          output_open = false;
        }
      } else {
        const ssize_t put = ::write(in_write.get(), input.data() + written, input.size() - written);
        if (put > 0) written += static_cast<std::size_t>(put);
        if ((put < 0 && errno != EAGAIN && errno != EINTR) || written == input.size()) {
          in_write.reset();  // EOF for the hook (or it stopped reading)
        }
      }
    }
  }
  if (!pending_line.empty() && logged < max_logged_bytes) {
    spdlog::info("alert hook {}: {}", program, pending_line);
  }

  int status = 0;
  if (!wait_until(pid, abort_.load() ? Clock::now() : deadline, status)) {
    spdlog::error("alert hook {}: still running after {} ms, stopping it", program, timeout_.count());
    ::kill(-pid, SIGTERM);
    if (!wait_until(pid, Clock::now() + kill_grace, status)) {
      ::kill(-pid, SIGKILL);
      wait_until(pid, Clock::now() + std::chrono::seconds(10), status);
    }
    std::lock_guard lock(mutex_);
    ++counters_.timeouts;
    ++counters_.failures;
    return;
  }
  if (WIFEXITED(status) && WEXITSTATUS(status) == 0) return;
  if (WIFEXITED(status)) return fail("exited with status " + std::to_string(WEXITSTATUS(status)));
  if (WIFSIGNALED(status)) return fail(std::string("died by signal ") + std::to_string(WTERMSIG(status)));
  fail("ended abnormally");
}

}  // namespace lphi::alerts
