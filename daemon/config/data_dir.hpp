// One lphid instance lives in one data directory: its database (lphi.db),
// its sockets (ingest.sock, control.sock, events.sock), its log (lphid.log), the file
// naming its endpoints (endpoints.json, for clients) and its lock (lphid.lock).
//
// InstanceLock holds an flock(2) on lphid.lock for as long as it lives, so a
// second lphid on the same directory is refused; the kernel drops the lock
// when the process dies, however it dies.
#pragma once

#include <optional>
#include <string>
#include <string_view>

namespace lphi::config {

struct Endpoints {
  std::string ingest;
  std::string control;
  std::string events;  // the event socket (ZeroMQ PUB): sweeps, fits, verdicts, alerts
};

// The absolute form of dir (sockets must be found from any working directory).
std::string absolute_data_dir(std::string_view dir);

// The endpoints lphid binds: configured ones, or ipc:// sockets inside dir.
Endpoints daemon_endpoints(std::string_view dir, const std::string& ingest_configured,
                           const std::string& control_configured,
                           const std::string& events_configured = "");

// What clients connect to: the endpoints lphid recorded in dir, or the defaults.
Endpoints client_endpoints(std::string_view dir);

// Records the endpoints for clients. Returns an error message on failure.
std::optional<std::string> write_endpoints_file(std::string_view dir, const Endpoints& endpoints);

// For an ipc:// endpoint: checks the path fits a socket address and removes a
// socket file left behind by a daemon that died (call only while holding the lock).
std::optional<std::string> prepare_ipc_endpoint(const std::string& endpoint);
// For an ipc:// endpoint after bind: sets the socket file's mode to 0660.
std::optional<std::string> restrict_ipc_endpoint(const std::string& endpoint);

// --data-dir, else $LPHI_DATA_DIR, else nothing.
std::optional<std::string> resolve_data_dir(const std::string& option);

class InstanceLock {
 public:
  InstanceLock() = default;
  ~InstanceLock();
  InstanceLock(const InstanceLock&) = delete;
  InstanceLock& operator=(const InstanceLock&) = delete;

  // Creates dir if needed and locks it. Returns an error message when another
  // process holds the lock or the directory cannot be used.
  std::optional<std::string> acquire(std::string_view dir);

 private:
  int fd_ = -1;
};

}  // namespace lphi::config
