#include "tests/support/daemon_process.hpp"

#include <fcntl.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <fstream>
#include <sstream>
#include <thread>
#include <zmq.hpp>

#include "daemon/config/data_dir.hpp"
#include "../support/text_file.hpp"

extern char** environ;

namespace lphi::testing {

using Clock = std::chrono::steady_clock;

std::string test_config(const std::string& sample_extra, const std::string& tail) {
  return R"toml(
[daemon]
log_level = "info"
[store]
commit_max_ms = 20
[ingest]
time_backward_tolerance_s = 60.0
[[source]]
name = "lockin-a"
kind = "lockin"
[[source]]
name = "mxc"
kind = "thermometer"
[[source]]
name = "magnet"
kind = "field"
[[sample]]
name = "film-a"
model = "hln2d"
squares = 5.0
width_m = 20e-6
thickness_m = 10e-9
excitation_a = 10e-9
lockin = "lockin-a"
thermometer = "mxc"
field = "magnet"
)toml" + sample_extra + (sample_extra.empty() || sample_extra.back() == '\n' ? "" : "\n") + tail;
}

namespace {

pid_t spawn(const std::vector<std::string>& args, const std::string& in, const std::string& out,
            const std::string& err) {
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_addopen(&actions, 0, in.empty() ? "/dev/null" : in.c_str(), O_RDONLY, 0);
  posix_spawn_file_actions_addopen(&actions, 1, out.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
  posix_spawn_file_actions_addopen(&actions, 2, err.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
  std::vector<char*> argv;
  for (const auto& a : args) argv.push_back(const_cast<char*>(a.c_str()));
  argv.push_back(nullptr);
  pid_t pid = -1;
  if (posix_spawn(&pid, argv[0], &actions, nullptr, argv.data(), environ) != 0) pid = -1;
  posix_spawn_file_actions_destroy(&actions);
  return pid;
}

// Waits for pid up to timeout; the exit status, or -1 if it had to be killed.
int wait_for(pid_t pid, std::chrono::milliseconds timeout) {
  const auto deadline = Clock::now() + timeout;
  int status = 0;
  while (Clock::now() < deadline) {
    const pid_t r = ::waitpid(pid, &status, WNOHANG);
    if (r == pid) return WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status);
    std::this_thread::sleep_for(std::chrono::milliseconds(5));
  }
  ::kill(pid, SIGKILL);
  ::waitpid(pid, &status, 0);
  return -1;
}


}  // namespace

DaemonProcess::DaemonProcess(std::string data_dir, std::string config_path)
    : data_dir_(std::move(data_dir)), config_path_(std::move(config_path)) {}

DaemonProcess::~DaemonProcess() {
  if (pid_ > 0) kill_hard();
}

bool DaemonProcess::start() {
  pid_ = spawn({LPHID_PATH, "--data-dir", data_dir_, "--config", config_path_, "--log", "file"}, "",
               data_dir_ + "/lphid.stdout", data_dir_ + "/lphid.stderr");
  if (pid_ <= 0) return false;
  const auto deadline = Clock::now() + std::chrono::seconds(30);
  while (Clock::now() < deadline) {
    int st = 0;
    if (::waitpid(pid_, &st, WNOHANG) == pid_) {  // it died on start
      pid_ = -1;
      return false;
    }
    if (status(std::chrono::milliseconds(200))) return true;
  }
  return false;
}

void DaemonProcess::kill_hard() {
  if (pid_ <= 0) return;
  ::kill(pid_, SIGKILL);
  int st = 0;
  ::waitpid(pid_, &st, 0);
  pid_ = -1;
}

int DaemonProcess::stop() {
  if (pid_ <= 0) return -1;
  ::kill(pid_, SIGTERM);
  const int rc = wait_for(pid_, std::chrono::seconds(30));
  pid_ = -1;
  return rc;
}

std::optional<nlohmann::json> DaemonProcess::status(std::chrono::milliseconds timeout) const {
  zmq::context_t context(1);
  zmq::socket_t socket(context, zmq::socket_type::dealer);
  socket.set(zmq::sockopt::linger, 0);
  socket.connect(config::client_endpoints(data_dir_).control);
  socket.send(zmq::str_buffer(R"({"type":"status"})"), zmq::send_flags::none);
  zmq::pollitem_t item{socket.handle(), 0, ZMQ_POLLIN, 0};
  zmq::poll(&item, 1, timeout);
  zmq::message_t reply;
  if (!(item.revents & ZMQ_POLLIN) || !socket.recv(reply, zmq::recv_flags::dontwait)) return std::nullopt;
  auto j = nlohmann::json::parse(reply.to_string_view(), nullptr, false);
  if (!j.is_object()) return std::nullopt;
  return j;
}

RunResult run_program(const std::vector<std::string>& args, const std::string& stdin_path,
                      std::chrono::seconds timeout) {
  char out_name[] = "/tmp/lphi-out-XXXXXX";
  char err_name[] = "/tmp/lphi-err-XXXXXX";
  ::close(::mkstemp(out_name));
  ::close(::mkstemp(err_name));
  RunResult r;
  const pid_t pid = spawn(args, stdin_path, out_name, err_name);
  if (pid > 0) r.exit_code = wait_for(pid, timeout);
  r.out = read_text_file(out_name);
  r.err = read_text_file(err_name);
  ::unlink(out_name);
  ::unlink(err_name);
  return r;
}

}  // namespace lphi::testing
