#include "daemon/config/data_dir.hpp"

#include <fcntl.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <sys/un.h>
#include <unistd.h>

#include <cerrno>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

namespace lphi::config {

namespace fs = std::filesystem;

namespace {

std::string in_dir(std::string_view dir, std::string_view file) {
  return (fs::path(std::string(dir)) / std::string(file)).string();
}

std::optional<std::string> ipc_path(const std::string& endpoint) {
  constexpr std::string_view prefix = "ipc://";
  if (endpoint.rfind(prefix, 0) != 0) return std::nullopt;
  return endpoint.substr(prefix.size());
}

}  // namespace

std::string absolute_data_dir(std::string_view dir) {
  std::error_code ec;
  auto p = fs::absolute(fs::path(std::string(dir)), ec);
  if (ec) return std::string(dir);
  return p.lexically_normal().string();
}

Endpoints daemon_endpoints(std::string_view dir, const std::string& ingest_configured,
                           const std::string& control_configured,
                           const std::string& events_configured) {
  const std::string abs = absolute_data_dir(dir);
  Endpoints e;
  e.ingest = ingest_configured.empty() ? "ipc://" + in_dir(abs, "ingest.sock") : ingest_configured;
  e.control = control_configured.empty() ? "ipc://" + in_dir(abs, "control.sock") : control_configured;
  e.events = events_configured.empty() ? "ipc://" + in_dir(abs, "events.sock") : events_configured;
  return e;
}

Endpoints client_endpoints(std::string_view dir) {
  Endpoints e = daemon_endpoints(dir, "", "");
  std::ifstream in(in_dir(dir, "endpoints.json"));
  if (!in) return e;
  auto j = nlohmann::json::parse(in, nullptr, false);
  if (j.is_object()) {
    if (auto it = j.find("ingest"); it != j.end() && it->is_string()) e.ingest = it->get<std::string>();
    if (auto it = j.find("control"); it != j.end() && it->is_string()) e.control = it->get<std::string>();
    if (auto it = j.find("events"); it != j.end() && it->is_string()) e.events = it->get<std::string>();
  }
  return e;
}

std::optional<std::string> write_endpoints_file(std::string_view dir, const Endpoints& e) {
  const std::string path = in_dir(dir, "endpoints.json");
  const std::string tmp = path + ".tmp";
  {
    std::ofstream out(tmp, std::ios::trunc);
    out << nlohmann::json{{"ingest", e.ingest}, {"control", e.control}, {"events", e.events}}.dump(2) << "\n";
    if (!out) return "cannot write " + tmp;
  }
  if (std::rename(tmp.c_str(), path.c_str()) != 0) {
    return "cannot rename " + tmp + ": " + std::strerror(errno);
  }
  return std::nullopt;
}

std::optional<std::string> prepare_ipc_endpoint(const std::string& endpoint) {
  auto path = ipc_path(endpoint);
  if (!path) return std::nullopt;
  if (path->size() >= sizeof(sockaddr_un{}.sun_path)) {
    return "the socket path " + *path + " is longer than the " +
           std::to_string(sizeof(sockaddr_un{}.sun_path) - 1) +
           " bytes a Unix socket allows; use a shorter data directory";
  }
  struct stat st {};
  if (::lstat(path->c_str(), &st) == 0) {
    if (!S_ISSOCK(st.st_mode)) return *path + " exists and is not a socket";
    if (::unlink(path->c_str()) != 0) return "cannot remove the stale socket " + *path;
  }
  return std::nullopt;
}

std::optional<std::string> restrict_ipc_endpoint(const std::string& endpoint) {
  auto path = ipc_path(endpoint);
  if (!path) return std::nullopt;
  if (::chmod(path->c_str(), 0660) != 0) {
    return "cannot set the mode of " + *path + ": " + std::strerror(errno);
  }
  return std::nullopt;
}

std::optional<std::string> resolve_data_dir(const std::string& option) {
  if (!option.empty()) return option;
  const char* env = std::getenv("LPHI_DATA_DIR");
  if (env != nullptr && *env != '\0') return std::string(env);
  return std::nullopt;
}

InstanceLock::~InstanceLock() {
  if (fd_ >= 0) ::close(fd_);
}

std::optional<std::string> InstanceLock::acquire(std::string_view dir) {
  std::error_code ec;
  fs::create_directories(fs::path(std::string(dir)), ec);
  if (ec) return "cannot create the data directory " + std::string(dir) + ": " + ec.message();
  const std::string path = in_dir(dir, "lphid.lock");
  const int fd = ::open(path.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0640);
  if (fd < 0) return "cannot open " + path + ": " + std::strerror(errno);
  if (::flock(fd, LOCK_EX | LOCK_NB) != 0) {
    const int err = errno;
    std::string holder;
    char buf[32] = {};
    const ssize_t n = ::pread(fd, buf, sizeof buf - 1, 0);
    if (n > 0) holder = std::string(buf, static_cast<std::size_t>(n));
    while (!holder.empty() && (holder.back() == '\n' || holder.back() == ' ')) holder.pop_back();
    ::close(fd);
    if (err == EWOULDBLOCK) {
      return "another lphid" + (holder.empty() ? std::string() : " (pid " + holder + ")") +
             " is using the data directory " + std::string(dir);
    }
    return "cannot lock " + path + ": " + std::strerror(err);
  }
  const std::string pid = std::to_string(::getpid()) + "\n";
  if (::ftruncate(fd, 0) != 0 || ::pwrite(fd, pid.data(), pid.size(), 0) < 0) {
    ::close(fd);
    return "cannot write " + path + ": " + std::strerror(errno);
  }
  fd_ = fd;
  return std::nullopt;
}

}  // namespace lphi::config
