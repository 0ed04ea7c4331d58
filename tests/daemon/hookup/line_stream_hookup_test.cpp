// lphid running line-stream drivers, over loopback TCP, end to end: one
// source in `connect` mode (lphid dials an instrument that pushes CSV lines)
// and one in `listen` mode (lphid binds, an instrument dials in and pushes
// JSON lines). The instruments here are plain POSIX sockets in the test; the
// readings are checked in the store through `lphi export`, the garbage in
// `lphi status`. Every wait is bounded.
#include <arpa/inet.h>
#include <gtest/gtest.h>
#include <netinet/in.h>
#include <poll.h>
#include <sys/socket.h>
#include <sys/stat.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include "tests/daemon/hookup/store_export.hpp"
#include "tests/support/daemon_process.hpp"
#include "tests/support/wall_clock.hpp"
#include "tests/support/temp_dir.hpp"

namespace lphi::testing {
namespace {

using namespace std::chrono_literals;
using nlohmann::json;
using Clock = std::chrono::steady_clock;

// A file descriptor that closes itself.
struct Fd {
  int fd = -1;
  Fd() = default;
  explicit Fd(int f) : fd(f) {}
  Fd(Fd&& o) noexcept : fd(o.fd) { o.fd = -1; }
  Fd& operator=(Fd&& o) noexcept {
    if (this != &o) {
      reset();
      fd = o.fd;
      o.fd = -1;
    }
    return *this;
  }
  ~Fd() { reset(); }
  void reset() {
    if (fd >= 0) ::close(fd);
    fd = -1;
  }
};

sockaddr_in loopback(int port) {
  sockaddr_in a{};
  a.sin_family = AF_INET;
  a.sin_port = htons(static_cast<std::uint16_t>(port));
  a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  return a;
}

// A listening socket on 127.0.0.1 with a port the kernel picked.
Fd listen_any(int& port) {
  Fd s(::socket(AF_INET, SOCK_STREAM, 0));
  if (s.fd < 0) return s;
  const int one = 1;
  ::setsockopt(s.fd, SOL_SOCKET, SO_REUSEADDR, &one, sizeof one);
  auto a = loopback(0);
  if (::bind(s.fd, reinterpret_cast<sockaddr*>(&a), sizeof a) != 0 || ::listen(s.fd, 4) != 0) return Fd{};
  socklen_t len = sizeof a;
  ::getsockname(s.fd, reinterpret_cast<sockaddr*>(&a), &len);
  port = ntohs(a.sin_port);
  return s;
}

// A port that was free a moment ago (for lphid to bind in listen mode).
int free_port() {
  int port = 0;
  Fd s = listen_any(port);
  return port;
}

Fd accept_within(const Fd& listener, std::chrono::milliseconds limit) {
  pollfd p{listener.fd, POLLIN, 0};
  if (::poll(&p, 1, static_cast<int>(limit.count())) != 1) return Fd{};
  return Fd(::accept(listener.fd, nullptr, nullptr));
}

// Dials 127.0.0.1:port until it answers (lphid binds a moment after start).
Fd connect_within(int port, std::chrono::milliseconds limit) {
  const auto deadline = Clock::now() + limit;
  while (Clock::now() < deadline) {
    Fd s(::socket(AF_INET, SOCK_STREAM, 0));
    auto a = loopback(port);
    if (::connect(s.fd, reinterpret_cast<sockaddr*>(&a), sizeof a) == 0) return s;
    std::this_thread::sleep_for(50ms);
  }
  return Fd{};
}

bool send_all(const Fd& s, const std::string& text) {
  std::size_t done = 0;
  while (done < text.size()) {
    const ssize_t n = ::send(s.fd, text.data() + done, text.size() - done, MSG_NOSIGNAL);
    if (n <= 0) return false;
    done += static_cast<std::size_t>(n);
  }
  return true;
}

const json* driver_of(const json& status, const std::string& source) {
  for (const auto& d : status.at("drivers")) {
    if (d.value("source", "") == source) return &d;
  }
  return nullptr;
}

std::uint64_t accepted(const json& status, const std::string& source) {
  for (const auto& s : status.at("sources")) {
    if (s.value("name", "") == source) return s.value("accepted", std::uint64_t{0});
  }
  return 0;
}

TEST(LineStreamHookup, ConnectAndListenModesStoreWhatTheInstrumentsPush) {
  const lphi::testing::TempDir temp;
  const std::string& dir = temp.path();
  const std::string data_dir = dir + "/data";
  ASSERT_EQ(::mkdir(data_dir.c_str(), 0700), 0);

  int thermometer_port = 0;
  Fd thermometer_listener = listen_any(thermometer_port);
  ASSERT_GE(thermometer_listener.fd, 0);
  const int magnet_port = free_port();
  ASSERT_GT(magnet_port, 0);

  // The thermometer pushes "time,temperature,resistance" (resistance in
  // kilohm: scale 1000); the magnet supply pushes JSON with the field in mT
  // (scale 1e-3). A lock-in source without a driver completes the sample.
  const std::string config =
      "[[source]]\nname = \"lockin\"\nkind = \"lockin\"\n\n"
      "[[source]]\nname = \"bridge\"\nkind = \"thermometer\"\ndriver = \"line-stream\"\n"
      "address = \"127.0.0.1:" + std::to_string(thermometer_port) + "\"\n"
      "reconnect_min_ms = 50\nreconnect_max_ms = 200\n"
      "[[source.field]]\nindex = 0\nquantity = \"time_s\"\n"
      "[[source.field]]\nindex = 1\nquantity = \"temperature_k\"\n"
      "[[source.field]]\nindex = 2\nquantity = \"resistance_ohm\"\nscale = 1000.0\n\n"
      "[[source]]\nname = \"magnet\"\nkind = \"field\"\ndriver = \"line-stream\"\n"
      "mode = \"listen\"\nformat = \"json\"\n"
      "address = \"127.0.0.1:" + std::to_string(magnet_port) + "\"\n"
      "[[source.field]]\nkey = \"t\"\nquantity = \"time_s\"\n"
      "[[source.field]]\nkey = \"b_mt\"\nquantity = \"field_t\"\nscale = 1.0e-3\n\n"
      "[[sample]]\nname = \"film\"\nmodel = \"hln2d\"\nsquares = 5.0\nwidth_m = 1.0e-4\n"
      "thickness_m = 1.0e-8\nexcitation_a = 1.0e-8\n"
      "lockin = \"lockin\"\nthermometer = \"bridge\"\nfield = \"magnet\"\n";
  const std::string config_path = dir + "/lphid.toml";
  std::ofstream(config_path) << config;

  DaemonProcess daemon(data_dir, config_path);
  ASSERT_TRUE(daemon.start()) << slurp(data_dir + "/lphid.log");

  // connect mode: lphid dials the thermometer.
  Fd bridge = accept_within(thermometer_listener, 10s);
  ASSERT_GE(bridge.fd, 0) << "lphid never connected\n" << slurp(data_dir + "/lphid.log");
  // listen mode: the magnet supply dials lphid.
  Fd magnet = connect_within(magnet_port, 10s);
  ASSERT_GE(magnet.fd, 0) << "lphid never listened\n" << slurp(data_dir + "/lphid.log");

  const double t0 = std::floor(unix_now()) - 100.0;
  std::string bridge_lines = "# channel 6, mixing chamber\n";
  std::string magnet_lines;
  for (int i = 0; i < 20; ++i) {
    const double t = t0 + i;
    bridge_lines += std::to_string(t) + "," + std::to_string(0.100 - 0.001 * i) + "," +
                    std::to_string(10.0 + 0.1 * i) + "\n";
    magnet_lines += "{\"t\": " + std::to_string(t) + ", \"b_mt\": " + std::to_string(-50.0 + 5.0 * i) + "}\n";
    if (i == 10) {  // garbage between good lines, and a line split in two sends
      bridge_lines += "not,a,number\n";
      magnet_lines += "{\"t\": oops}\n";
    }
  }
  const std::size_t half = bridge_lines.size() / 2;
  ASSERT_TRUE(send_all(bridge, bridge_lines.substr(0, half)));
  std::this_thread::sleep_for(100ms);
  ASSERT_TRUE(send_all(bridge, bridge_lines.substr(half)));
  ASSERT_TRUE(send_all(magnet, magnet_lines));

  std::optional<json> status;
  const auto deadline = Clock::now() + 20s;
  while (Clock::now() < deadline) {
    status = daemon.status(2s);
    if (status && accepted(*status, "bridge") >= 20 && accepted(*status, "magnet") >= 20) break;
    std::this_thread::sleep_for(50ms);
  }
  ASSERT_TRUE(status) << slurp(data_dir + "/lphid.log");
  ASSERT_EQ(accepted(*status, "bridge"), 20u) << status->dump(2);
  ASSERT_EQ(accepted(*status, "magnet"), 20u) << status->dump(2);

  // Each garbage line is counted by its driver (one each), the comment is not garbage.
  for (const char* source : {"bridge", "magnet"}) {
    const json* d = driver_of(*status, source);
    ASSERT_NE(d, nullptr) << status->dump(2);
    EXPECT_EQ(d->value("driver", ""), "line-stream");
    EXPECT_EQ(d->at("faults").value("garbage_replies", 99u), 1u) << source << "\n" << d->dump(2);
  }
  ASSERT_EQ(daemon.stop(), 0);

  // The stored readings carry the instruments' own times and the scaled values.
  const auto temperatures = export_readings(data_dir, "bridge");
  ASSERT_EQ(temperatures.size(), 20u);
  for (std::size_t i = 0; i < temperatures.size(); ++i) {
    const auto& r = temperatures[i];
    EXPECT_EQ(r.at("seq").get<std::int64_t>(), static_cast<std::int64_t>(i));
    EXPECT_DOUBLE_EQ(r.at("t").get<double>(), t0 + static_cast<double>(i));
    // std::to_string prints 6 decimals: the values are exact to 5e-7 of their unit.
    EXPECT_NEAR(r.at("temperature_k").get<double>(), 0.100 - 0.001 * static_cast<double>(i), 1e-6);
    EXPECT_NEAR(r.at("resistance_ohm").get<double>(), 1000.0 * (10.0 + 0.1 * static_cast<double>(i)), 1e-3);
  }
  const auto fields = export_readings(data_dir, "magnet");
  ASSERT_EQ(fields.size(), 20u);
  for (std::size_t i = 0; i < fields.size(); ++i) {
    EXPECT_DOUBLE_EQ(fields[i].at("t").get<double>(), t0 + static_cast<double>(i));
    EXPECT_NEAR(fields[i].at("field_t").get<double>(), 1e-3 * (-50.0 + 5.0 * static_cast<double>(i)), 1e-9);
  }
  std::filesystem::remove_all(dir);
}

}  // namespace
}  // namespace lphi::testing
