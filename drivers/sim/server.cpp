#include "drivers/sim/server.hpp"

#include <array>
#include <utility>
#include <boost/asio.hpp>
#include <chrono>
#include <cmath>
#include <csignal>
#include <cstdio>
#include <deque>
#include <fstream>
#include <vector>

#include "drivers/instrument/line_framer.hpp"
#include "drivers/sim/instruments.hpp"
#include "drivers/sim/truth_file.hpp"

namespace lphi::sim {

namespace asio = boost::asio;
using tcp = asio::ip::tcp;
using Clock = std::chrono::steady_clock;

namespace {
constexpr std::size_t kMaxPendingReplies = 256;
constexpr auto kTick = std::chrono::milliseconds(2);
}  // namespace

class Session;

struct SimServer::Impl {
  Impl(Scenario s, ServerOptions o)
      : options(std::move(o)),
        world(std::move(s)),
        instruments{make(Instrument::lockin), make(Instrument::thermometer), make(Instrument::magnet)},
        acceptors{tcp::acceptor(io), tcp::acceptor(io), tcp::acceptor(io)},
        tick_timer(io),
        signals(io) {}

  std::unique_ptr<SimInstrument> make(Instrument i) {
    return std::make_unique<SimInstrument>(i, world, options.speed, options.epoch_start_s);
  }
  double now_s() const {
    return options.speed * std::chrono::duration<double>(Clock::now() - start).count();
  }
  bool lockin_closed(double t) const {
    for (const auto& d : world.scenario().faults.dropouts)
      if (!d.silent && d.contains(t)) return true;
    return false;
  }
  bool lockin_silent(double t) const {
    for (const auto& d : world.scenario().faults.dropouts)
      if (d.silent && d.contains(t)) return true;
    return world.lockin_in_hole(t);  // a lockin-hole: no reply while the field is in it
  }

  void accept(Instrument i);
  void close_all(Instrument i);
  void on_tick();
  void finish();
  void write_truth(const std::string& line);

  ServerOptions options;
  World world;
  std::array<std::unique_ptr<SimInstrument>, 3> instruments;
  asio::io_context io;
  std::array<tcp::acceptor, 3> acceptors;
  std::array<std::vector<std::weak_ptr<Session>>, 3> sessions;
  asio::steady_timer tick_timer;
  asio::signal_set signals;
  Clock::time_point start = Clock::now();
  double last_tick_s = -1.0;
  std::size_t next_sweep = 0, next_plateau = 0;
  std::ofstream truth;
  std::string error;
  bool finished = false;
};

// One connection: reads lines, answers them in order, closes on any error.
class Session : public std::enable_shared_from_this<Session> {
 public:
  Session(tcp::socket socket, SimServer::Impl& server, Instrument kind)
      : socket_(std::move(socket)), server_(server), kind_(kind) {}

  void start() { read(); }

  void close() {
    boost::system::error_code ignored;
    socket_.shutdown(tcp::socket::shutdown_both, ignored);
    socket_.close(ignored);
  }

 private:
  void read() {
    socket_.async_read_some(asio::buffer(buffer_),
                            [self = shared_from_this()](boost::system::error_code ec, std::size_t n) {
                              if (ec) {
                                self->close();
                                return;
                              }
                              self->consume(n);
                              if (self->socket_.is_open()) self->read();
                            });
  }

  // Lines are cut by the drivers' own framer (one definition of a line for
  // both ends of the wire); an over-long one is answered with -223 once.
  void consume(std::size_t n) {
    framer_.feed(std::string_view(buffer_.data(), n));
    while (socket_.is_open()) {
      auto line = framer_.next_line();
      if (!line) break;
      handle(*line);
    }
    for (std::uint64_t k = framer_.take_overlong(); k > 0 && socket_.is_open(); --k) {
      send(server_.instruments[index()]->line_too_long());
    }
  }

  void handle(std::string& line) {
    if (!line.empty() && line.back() == '\r') line.pop_back();
    const double t = server_.now_s();
    if (kind_ == Instrument::lockin && server_.lockin_silent(t)) return;
    if (auto reply = server_.instruments[index()]->execute(line, t)) send(std::move(*reply));
  }

  void send(std::string reply) {
    if (pending_.size() >= kMaxPendingReplies) {
      close();
      return;
    }
    pending_.push_back(std::move(reply) + "\n");
    if (!writing_) write();
  }

  void write() {
    writing_ = true;
    asio::async_write(socket_, asio::buffer(pending_.front()),
                      [self = shared_from_this()](boost::system::error_code ec, std::size_t) {
                        if (ec) {
                          self->close();
                          return;
                        }
                        self->pending_.pop_front();
                        self->writing_ = false;
                        if (!self->pending_.empty()) self->write();
                      });
  }

  std::size_t index() const { return static_cast<std::size_t>(kind_); }

  tcp::socket socket_;
  SimServer::Impl& server_;
  Instrument kind_;
  std::array<char, 512> buffer_{};
  drivers::LineFramer framer_{"\n", scpi::kMaxLineBytes};
  std::deque<std::string> pending_;
  bool writing_ = false;
};

void SimServer::Impl::accept(Instrument i) {
  const auto k = static_cast<std::size_t>(i);
  acceptors[k].async_accept([this, i, k](boost::system::error_code ec, tcp::socket socket) {
    if (ec) {
      if (ec != asio::error::operation_aborted && !finished) accept(i);
      return;
    }
    if (i == Instrument::lockin && lockin_closed(now_s())) {
      boost::system::error_code ignored;
      socket.close(ignored);
    } else {
      auto session = std::make_shared<Session>(std::move(socket), *this, i);
      std::erase_if(sessions[k], [](const auto& w) { return w.expired(); });
      sessions[k].push_back(session);
      session->start();
    }
    accept(i);
  });
}

void SimServer::Impl::close_all(Instrument i) {
  for (auto& weak : sessions[static_cast<std::size_t>(i)])
    if (auto s = weak.lock()) s->close();
  sessions[static_cast<std::size_t>(i)].clear();
}

void SimServer::Impl::write_truth(const std::string& line) {
  if (!truth.is_open()) return;
  truth << line << '\n';
  truth.flush();
}

void SimServer::Impl::on_tick() {
  if (finished) return;
  const double t = now_s();
  const Faults& f = world.scenario().faults;
  if (lockin_closed(t)) close_all(Instrument::lockin);
  for (const Faults::Reset& r : f.resets) {
    if (t < r.at_s) continue;
    // The latest reset time at or before t; it fires if it is after the last tick.
    const double latest =
        r.period_s > 0 ? r.at_s + std::floor((t - r.at_s) / r.period_s) * r.period_s : r.at_s;
    if (latest <= last_tick_s) continue;
    for (Instrument i : kInstruments)
      if (r.all || r.instrument == i) close_all(i);
  }
  last_tick_s = t;
  const Schedule& plan = world.schedule();
  while (next_sweep < plan.sweeps().size() && plan.sweeps()[next_sweep].end_s <= t)
    write_truth(truth::sweep_record(world, plan.sweeps()[next_sweep++]));
  while (next_plateau < plan.plateaus().size() && plan.plateaus()[next_plateau].end_s <= t)
    write_truth(truth::plateau_record(world, plan.plateaus()[next_plateau++]));
  const bool past_duration = options.duration_s > 0 && t >= options.duration_s;
  const bool past_programme = options.duration_s <= 0 && !options.hold && t >= plan.end_s();
  if (past_duration || past_programme) {
    finish();
    return;
  }
  tick_timer.expires_after(kTick);
  tick_timer.async_wait([this](boost::system::error_code ec) {
    if (!ec) on_tick();
  });
}

void SimServer::Impl::finish() {
  if (finished) return;
  finished = true;
  boost::system::error_code ignored;
  for (auto& a : acceptors) a.close(ignored);
  for (Instrument i : kInstruments) close_all(i);
  tick_timer.cancel();
  signals.cancel();
  io.stop();
}

SimServer::SimServer(Scenario scenario, ServerOptions options)
    : impl_(std::make_unique<Impl>(std::move(scenario), std::move(options))) {}

SimServer::~SimServer() = default;

std::string SimServer::open() {
  Impl& m = *impl_;
  boost::system::error_code ec;
  const auto address = asio::ip::make_address(m.options.bind, ec);
  if (ec) return "cannot use bind address '" + m.options.bind + "': " + ec.message();
  for (Instrument i : kInstruments) {
    const auto k = static_cast<std::size_t>(i);
    const auto wanted = static_cast<unsigned short>(m.world.scenario().ports[k]);
    const tcp::endpoint endpoint(address, wanted);
    tcp::acceptor& a = m.acceptors[k];
    if (a.open(endpoint.protocol(), ec) || a.set_option(tcp::acceptor::reuse_address(true), ec) ||
        a.bind(endpoint, ec) || a.listen(asio::socket_base::max_listen_connections, ec))
      return std::string(instrument_name(i)) + ": cannot listen on " + m.options.bind + ":" +
             std::to_string(wanted) + ": " + ec.message();
  }
  if (m.options.announce) {
    for (Instrument i : kInstruments)
      std::printf("lphi-sim: %s listening on %s:%d\n", instrument_name(i), m.options.bind.c_str(),
                  port(i));
    std::fflush(stdout);
  }
  if (!m.options.ports_file.empty()) {
    const std::string tmp = m.options.ports_file + ".tmp";
    {
      std::ofstream out(tmp);
      out << "{\"lockin\":" << port(Instrument::lockin)
          << ",\"thermometer\":" << port(Instrument::thermometer)
          << ",\"magnet\":" << port(Instrument::magnet) << "}\n";
      if (!out) return "cannot write ports file '" + m.options.ports_file + "'";
    }
    if (std::rename(tmp.c_str(), m.options.ports_file.c_str()) != 0)
      return "cannot write ports file '" + m.options.ports_file + "'";
  }
  if (!m.options.truth_path.empty()) {
    m.truth.open(m.options.truth_path, std::ios::out | std::ios::trunc);
    if (!m.truth) return "cannot write truth file '" + m.options.truth_path + "'";
    m.write_truth(truth::scenario_record(m.world.scenario()));
  }
  return {};
}

int SimServer::port(Instrument i) const {
  const tcp::acceptor& a = impl_->acceptors[static_cast<std::size_t>(i)];
  boost::system::error_code ec;
  const auto endpoint = a.local_endpoint(ec);
  return ec ? 0 : endpoint.port();
}

std::string SimServer::run() {
  Impl& m = *impl_;
  if (!m.acceptors[0].is_open()) return "run() before a successful open()";
  if (m.options.handle_signals) {
    m.signals.add(SIGINT);
    m.signals.add(SIGTERM);
    m.signals.async_wait([&m](boost::system::error_code ec, int) {
      if (!ec) m.finish();
    });
  }
  m.start = Clock::now();
  for (Instrument i : kInstruments) m.accept(i);
  m.on_tick();
  m.io.run();
  return m.error;
}

void SimServer::stop() {
  asio::post(impl_->io, [m = impl_.get()] { m->finish(); });
}

}  // namespace lphi::sim
