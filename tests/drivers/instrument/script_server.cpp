#include "tests/drivers/instrument/script_server.hpp"

#include <future>

namespace lphi::drivers::testing {

namespace asio = boost::asio;
using tcp = asio::ip::tcp;

struct ScriptServer::Session {
  explicit Session(asio::io_context& io) : socket(io), timer(io) {}
  tcp::socket socket;
  asio::steady_timer timer;
  std::string input;
  std::size_t number = 0;
  std::size_t lines = 0;
  bool open = true;
  void close() {
    boost::system::error_code ignored;
    open = false;
    socket.shutdown(tcp::socket::shutdown_both, ignored);
    socket.close(ignored);
    timer.cancel();
  }
};

ScriptServer::ScriptServer(Script script, Feed feed, std::string terminator)
    : script_(std::move(script)), feed_(std::move(feed)), terminator_(std::move(terminator)) {
  work_.emplace(io_.get_executor());
  open(0);
  thread_ = std::thread([this] { io_.run(); });
}

ScriptServer::~ScriptServer() {
  shut_down();
  work_.reset();
  io_.stop();
  thread_.join();
}

template <class F>
void ScriptServer::on_server_thread(F&& f) {
  std::promise<void> done;
  asio::post(io_, [&] {
    f();
    done.set_value();
  });
  done.get_future().wait();
}

void ScriptServer::open(std::uint16_t port) {
  acceptor_.emplace(io_);
  const tcp::endpoint endpoint(asio::ip::make_address("127.0.0.1"), port);
  acceptor_->open(endpoint.protocol());
  acceptor_->set_option(tcp::acceptor::reuse_address(true));
  acceptor_->bind(endpoint);
  acceptor_->listen();
  port_ = acceptor_->local_endpoint().port();
  accept();
}

void ScriptServer::shut_down() {
  on_server_thread([this] {
    boost::system::error_code ignored;
    if (acceptor_) acceptor_->close(ignored);
    acceptor_.reset();
    for (const auto& s : sessions_) s->close();
    sessions_.clear();
  });
}

void ScriptServer::restart() {
  on_server_thread([this] { open(port_); });
}

void ScriptServer::accept() {
  auto session = std::make_shared<Session>(io_);
  acceptor_->async_accept(session->socket, [this, session](const boost::system::error_code& ec) {
    if (ec) return;
    session->number = accepted_++;
    sessions_.insert(session);
    if (feed_) {
      auto chunks = std::make_shared<std::vector<Chunk>>(feed_(session->number));
      feed(session, chunks, 0);
    }
    serve(session);
    if (acceptor_) accept();
  });
}

void ScriptServer::feed(std::shared_ptr<Session> session, std::shared_ptr<std::vector<Chunk>> chunks,
                        std::size_t i) {
  if (i >= chunks->size() || !session->open) return;
  auto write = [this, session, chunks, i] {
    if (!session->open) return;
    const Chunk& c = (*chunks)[i];
    asio::async_write(session->socket, asio::buffer(c.bytes),
                      [this, session, chunks, i](const boost::system::error_code& ec, std::size_t) {
                        if (ec) return;
                        if ((*chunks)[i].hang_up_after) {
                          session->close();
                          sessions_.erase(session);
                          return;
                        }
                        feed(session, chunks, i + 1);
                      });
  };
  if ((*chunks)[i].delay_before.count() == 0) {
    write();
    return;
  }
  // Each chunk gets its own timer so a feed does not disturb a scripted reply.
  auto timer = std::make_shared<asio::steady_timer>(io_, (*chunks)[i].delay_before);
  timer->async_wait([timer, write](const boost::system::error_code& ec) {
    if (!ec) write();
  });
}

void ScriptServer::serve(std::shared_ptr<Session> session) {
  asio::async_read_until(
      session->socket, asio::dynamic_buffer(session->input), '\n',
      [this, session](const boost::system::error_code& ec, std::size_t n) {
        if (ec || !session->open) {
          session->close();
          sessions_.erase(session);
          return;
        }
        std::string line = session->input.substr(0, n - 1);
        session->input.erase(0, n);
        if (!line.empty() && line.back() == '\r') line.pop_back();
        ++lines_;
        const Action action = script_(session->number, session->lines++, line);
        auto reply = std::make_shared<std::string>(action.text);
        switch (action.kind) {
          case Action::Kind::silent:
            break;
          case Action::Kind::hang_up:
            session->close();
            sessions_.erase(session);
            return;
          case Action::Kind::reply:
            *reply += terminator_;
            [[fallthrough]];
          case Action::Kind::partial:
          case Action::Kind::disconnect_mid: {
            const bool hang_up = action.kind == Action::Kind::disconnect_mid;
            auto send = [this, session, reply, hang_up] {
              if (!session->open) return;
              asio::async_write(session->socket, asio::buffer(*reply),
                                [this, session, reply, hang_up](const boost::system::error_code&, std::size_t) {
                                  if (hang_up) {
                                    session->close();
                                    sessions_.erase(session);
                                  }
                                });
            };
            if (action.delay.count() > 0) {
              auto timer = std::make_shared<asio::steady_timer>(io_, action.delay);
              timer->async_wait([timer, send](const boost::system::error_code& tec) {
                if (!tec) send();
              });
            } else {
              send();
            }
            if (hang_up) return;
            break;
          }
        }
        serve(session);
      });
}

std::uint16_t unused_port() {
  asio::io_context io;
  tcp::acceptor a(io, tcp::endpoint(asio::ip::make_address("127.0.0.1"), 0));
  return a.local_endpoint().port();
}

bool run_until(asio::io_context& io, const std::function<bool()>& done, std::chrono::milliseconds limit) {
  const auto deadline = std::chrono::steady_clock::now() + limit;
  while (!done()) {
    if (std::chrono::steady_clock::now() > deadline) return false;
    io.restart();
    io.run_for(std::chrono::milliseconds(5));
  }
  return true;
}

void run_for(asio::io_context& io, std::chrono::milliseconds span) {
  const auto deadline = std::chrono::steady_clock::now() + span;
  while (std::chrono::steady_clock::now() < deadline) {
    io.restart();
    io.run_until(deadline);
  }
}

}  // namespace lphi::drivers::testing
