#include "tests/support/sim_process.hpp"

#include <arpa/inet.h>
#include <fcntl.h>
#include <netinet/in.h>
#include <poll.h>
#include <signal.h>
#include <sys/socket.h>
#include <unistd.h>

#include <cerrno>
#include <cmath>
#include <nlohmann/json.hpp>
#include <sstream>
#include <thread>

#include "schema/text/text.hpp"

namespace lphi::testing {

using Clock = std::chrono::steady_clock;

namespace {

int remaining_ms(Clock::time_point deadline) {
  const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - Clock::now());
  return left.count() > 0 ? static_cast<int>(left.count()) : 0;
}

}  // namespace

SimProcess::SimProcess() = default;
SimProcess::~SimProcess() = default;  // the process is killed before the directory goes

std::string SimProcess::write_file(const std::string& name, const std::string& text) const {
  return dir_.write(name, text);
}

bool SimProcess::start(const std::string& scenario_path, const std::vector<std::string>& extra) {
  Launch launch;
  launch.args = {LPHI_SIM_PATH, scenario_path, "--ports-file", dir_.file("ports.json"),
                 "--truth", truth_path()};
  launch.args.insert(launch.args.end(), extra.begin(), extra.end());
  launch.stdout_path = dir_.file("stdout");
  launch.stderr_path = dir_.file("stderr");
  if (!process_.start(launch)) return false;
  const auto deadline = Clock::now() + std::chrono::seconds(20);
  while (Clock::now() < deadline) {
    if (process_.poll()) return false;
    const auto j = nlohmann::json::parse(read_text_file(dir_.file("ports.json")), nullptr, false);
    if (j.is_object() && j.contains("magnet")) {
      ports_[0] = j["lockin"];
      ports_[1] = j["thermometer"];
      ports_[2] = j["magnet"];
      return true;
    }
    std::this_thread::sleep_for(std::chrono::milliseconds(5));
  }
  return false;
}

int SimProcess::port(const std::string& instrument) const {
  if (instrument == "lockin") return ports_[0];
  if (instrument == "thermometer") return ports_[1];
  return ports_[2];
}

int SimProcess::wait(std::chrono::milliseconds timeout) { return process_.wait(timeout); }

int SimProcess::stop() {
  if (!process_.running()) return -1;
  process_.signal(SIGTERM);
  return wait(std::chrono::seconds(10));
}

std::string SimProcess::stderr_text() const { return read_text_file(dir_.file("stderr")); }

LineClient::~LineClient() { close(); }

void LineClient::close() {
  if (fd_ >= 0) ::close(fd_);
  fd_ = -1;
  buffer_.clear();
}

bool LineClient::connect(int port, std::chrono::milliseconds timeout) {
  close();
  closed_ = false;
  fd_ = ::socket(AF_INET, SOCK_STREAM | SOCK_NONBLOCK, 0);
  if (fd_ < 0) return false;
  sockaddr_in addr{};
  addr.sin_family = AF_INET;
  addr.sin_port = htons(static_cast<std::uint16_t>(port));
  addr.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  if (::connect(fd_, reinterpret_cast<sockaddr*>(&addr), sizeof addr) == 0) return true;
  if (errno != EINPROGRESS) {
    close();
    return false;
  }
  pollfd p{fd_, POLLOUT, 0};
  if (::poll(&p, 1, static_cast<int>(timeout.count())) != 1) {
    close();
    return false;
  }
  int err = 0;
  socklen_t len = sizeof err;
  ::getsockopt(fd_, SOL_SOCKET, SO_ERROR, &err, &len);
  if (err != 0) {
    close();
    return false;
  }
  return true;
}

bool LineClient::send(const std::string& text) {
  if (fd_ < 0) return false;
  std::size_t sent = 0;
  const auto deadline = Clock::now() + std::chrono::seconds(2);
  while (sent < text.size()) {
    const ssize_t n = ::send(fd_, text.data() + sent, text.size() - sent, MSG_NOSIGNAL);
    if (n > 0) {
      sent += static_cast<std::size_t>(n);
      continue;
    }
    if (n < 0 && (errno == EAGAIN || errno == EWOULDBLOCK)) {
      pollfd p{fd_, POLLOUT, 0};
      if (::poll(&p, 1, remaining_ms(deadline)) != 1) return false;
      continue;
    }
    closed_ = true;
    return false;
  }
  return true;
}

std::optional<std::string> LineClient::read_line(std::chrono::milliseconds timeout) {
  const auto deadline = Clock::now() + timeout;
  while (true) {
    if (const auto nl = buffer_.find('\n'); nl != std::string::npos) {
      std::string line = buffer_.substr(0, nl);
      buffer_.erase(0, nl + 1);
      return line;
    }
    if (fd_ < 0 || closed_) return std::nullopt;
    pollfd p{fd_, POLLIN, 0};
    const int ready = ::poll(&p, 1, remaining_ms(deadline));
    if (ready != 1) return std::nullopt;
    char chunk[4096];
    const ssize_t n = ::recv(fd_, chunk, sizeof chunk, 0);
    if (n > 0) {
      buffer_.append(chunk, static_cast<std::size_t>(n));
    } else if (n == 0 || (errno != EAGAIN && errno != EWOULDBLOCK)) {
      closed_ = true;
      return std::nullopt;
    }
  }
}

std::optional<std::string> LineClient::query(const std::string& line, std::chrono::milliseconds timeout) {
  if (!send(line + "\n")) return std::nullopt;
  return read_line(timeout);
}

std::vector<double> fields(const std::string& reply) {
  std::vector<double> out;
  std::stringstream s(reply);
  std::string f;
  while (std::getline(s, f, ',')) out.push_back(text::parse_number(f).value_or(std::nan("")));
  return out;
}

}  // namespace lphi::testing
