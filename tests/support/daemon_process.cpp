#include "tests/support/daemon_process.hpp"

#include <signal.h>

#include <zmq.hpp>

#include "daemon/config/data_dir.hpp"

namespace lphi::testing {

using Clock = std::chrono::steady_clock;

std::string test_sample(const std::string& name, const std::string& extra) {
  std::string toml = "[[sample]]\nname = \"" + name + "\"\n" + R"toml(model = "hln2d"
squares = 5.0
width_m = 20e-6
thickness_m = 10e-9
excitation_a = 10e-9
lockin = "lockin-a"
thermometer = "mxc"
field = "magnet"
)toml";
  return toml + extra + (extra.empty() || extra.back() == '\n' ? "" : "\n");
}

std::string test_config(const std::string& sample_extra, const std::string& tail) {
  std::string toml = R"toml([daemon]
log_level = "info"
[store]
commit_max_ms = 20
[ingest]
time_backward_tolerance_s = 60.0
)toml";
  for (const auto& [name, kind] : {std::pair{"lockin-a", "lockin"}, std::pair{"mxc", "thermometer"},
                                   std::pair{"magnet", "field"}}) {
    toml += std::string("[[source]]\nname = \"") + name + "\"\nkind = \"" + kind + "\"\n";
  }
  return toml + test_sample("film-a", sample_extra) + tail;
}

DaemonProcess::DaemonProcess(std::string data_dir, std::string config_path)
    : data_dir_(std::move(data_dir)), config_path_(std::move(config_path)) {}

DaemonProcess::~DaemonProcess() = default;

bool DaemonProcess::start() {
  Launch launch;
  launch.args = {LPHID_PATH, "--data-dir", data_dir_, "--config", config_path_, "--log", "file"};
  launch.stdout_path = data_dir_ + "/lphid.stdout";
  launch.stderr_path = data_dir_ + "/lphid.stderr";
  if (!process_.start(launch)) return false;
  const auto deadline = Clock::now() + std::chrono::seconds(30);
  while (Clock::now() < deadline) {
    if (process_.poll()) return false;  // it died on start
    if (status(std::chrono::milliseconds(200))) return true;
  }
  return false;
}

void DaemonProcess::kill_hard() { process_.kill_hard(); }

int DaemonProcess::stop() {
  if (!process_.running()) return -1;
  process_.signal(SIGTERM);
  return process_.wait(std::chrono::seconds(30));
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
  Launch launch;
  launch.args = args;
  launch.stdin_path = stdin_path;
  return run_program(launch, timeout);
}

}  // namespace lphi::testing
