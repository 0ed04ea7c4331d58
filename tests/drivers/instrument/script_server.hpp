// ScriptServer: a scripted, misbehaving instrument on a loopback TCP port, for
// the driver tests. It runs on its own thread and io_context, so whatever it
// does (stay silent, answer late, cut a line, hang up) cannot block the
// drivers' io_context: only the network stands between them.
#pragma once

#include <atomic>
#include <optional>
#include <utility>
// (Boost 1.74's asio.hpp needs <utility> before it.)
#include <boost/asio.hpp>
#include <chrono>
#include <cstdint>
#include <functional>
#include <memory>
#include <mutex>
#include <set>
#include <string>
#include <thread>
#include <vector>

namespace lphi::drivers::testing {

struct Action {
  enum class Kind {
    reply,           // text + terminator, after `delay`
    silent,          // no answer
    partial,         // text without terminator; the connection stays
    disconnect_mid,  // text without terminator, then hang up
    hang_up,         // close the connection without a word
  };
  Kind kind = Kind::reply;
  std::string text;
  std::chrono::milliseconds delay{0};

  static Action reply(std::string t, std::chrono::milliseconds d = {}) { return {Kind::reply, std::move(t), d}; }
  static Action silent() { return {Kind::silent, {}, {}}; }
  static Action partial(std::string t) { return {Kind::partial, std::move(t), {}}; }
  static Action disconnect_mid(std::string t) { return {Kind::disconnect_mid, std::move(t), {}}; }
  static Action hang_up() { return {Kind::hang_up, {}, {}}; }
};

// A chunk a pushing instrument writes after connect (line-stream tests).
struct Chunk {
  std::string bytes;
  std::chrono::milliseconds delay_before{0};
  bool hang_up_after = false;
};

class ScriptServer {
 public:
  // Called for each line received (without its terminator), with the
  // connection's number (from 0) and the line's number on it (from 0).
  using Script = std::function<Action(std::size_t connection, std::size_t line, const std::string& text)>;
  // Called on accept: what to push unasked.
  using Feed = std::function<std::vector<Chunk>(std::size_t connection)>;

  explicit ScriptServer(Script script, Feed feed = {}, std::string terminator = "\n");
  ~ScriptServer();
  ScriptServer(const ScriptServer&) = delete;
  ScriptServer& operator=(const ScriptServer&) = delete;

  std::uint16_t port() const { return port_; }
  // Closes the listening socket and every connection (the instrument is off).
  void shut_down();
  // Listens again on the same port (the instrument is back).
  void restart();
  std::size_t connections_accepted() const { return accepted_.load(); }
  std::size_t lines_received() const { return lines_.load(); }

 private:
  struct Session;
  void open(std::uint16_t port);
  void accept();
  void serve(std::shared_ptr<Session> session);
  void feed(std::shared_ptr<Session> session, std::shared_ptr<std::vector<Chunk>> chunks, std::size_t i);
  template <class F>
  void on_server_thread(F&& f);

  Script script_;
  Feed feed_;
  std::string terminator_;
  boost::asio::io_context io_;
  std::optional<boost::asio::executor_work_guard<boost::asio::io_context::executor_type>> work_;
  std::optional<boost::asio::ip::tcp::acceptor> acceptor_;
  std::set<std::shared_ptr<Session>> sessions_;
  std::uint16_t port_ = 0;
  std::atomic<std::size_t> accepted_{0};
  std::atomic<std::size_t> lines_{0};
  std::thread thread_;
};

// A port on which nothing listens (bound once, then released).
std::uint16_t unused_port();

// Runs `io` on this thread until `done()` or `limit` passes; true when done.
bool run_until(boost::asio::io_context& io, const std::function<bool()>& done,
               std::chrono::milliseconds limit);
// Runs `io` for `span` (for tests that measure what happens during a span).
void run_for(boost::asio::io_context& io, std::chrono::milliseconds span);

}  // namespace lphi::drivers::testing
