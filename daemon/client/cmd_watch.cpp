// lphi watch: follows lphid's event socket (a ZeroMQ PUB; two frames per
// event, the topic then the JSON body) and prints one line per event, or the
// body as it came with --json, until SIGINT, --count events or --timeout-s.
#include <chrono>
#include <iostream>
#include <memory>
#include <nlohmann/json.hpp>
#include <set>
#include <sstream>
#include <string>
#include <zmq.hpp>

#include "daemon/client/control_request.hpp"
#include "daemon/client/daemon_locate.hpp"
#include "daemon/client/exit_codes.hpp"
#include "daemon/client/interrupt.hpp"
#include "daemon/client/live_commands.hpp"
#include "daemon/client/live_format.hpp"

namespace lphi::client {

namespace {

using nlohmann::json;
using Clock = std::chrono::steady_clock;

struct WatchOptions {
  std::string data_dir;
  std::string sample;
  std::string topics = "alert,fit,verdict,sweep";
  bool json = false;
  long long count = 0;     // 0: no limit
  double timeout_s = 0.0;  // 0: no limit
  double connect_timeout_s = 5.0;
};

const std::set<std::string> known_topics = {"alert", "fit", "verdict", "sweep"};

// The topics of a comma-separated list; empty after printing an error.
std::set<std::string> parse_topics(const std::string& list) {
  std::set<std::string> topics;
  std::stringstream in(list);
  std::string topic;
  while (std::getline(in, topic, ',')) {
    if (topic.empty()) continue;
    if (known_topics.count(topic) == 0) {
      std::cerr << "lphi: --topics: unknown topic \"" << topic << "\" (use alert, fit, verdict, sweep)\n";
      return {};
    }
    topics.insert(topic);
  }
  if (topics.empty()) std::cerr << "lphi: --topics names no topic (use alert, fit, verdict, sweep)\n";
  return topics;
}

// Whether an event concerns the sample: its "sample", or for an alert its
// "subject" (a sample's or a source's name).
bool concerns(const json& body, const std::string& sample) {
  if (sample.empty()) return true;
  if (!body.is_object()) return false;
  for (const char* key : {"sample", "subject"}) {
    const auto it = body.find(key);
    if (it != body.end() && it->is_string() && *it == sample) return true;
  }
  return false;
}

int run_watch(const WatchOptions& opt) {
  const auto topics = parse_topics(opt.topics);
  if (topics.empty()) return exit_bad_input;
  auto dir = locate_data_dir(opt.data_dir);
  if (!dir) return exit_bad_input;
  const auto endpoints = config::client_endpoints(*dir);
  if (endpoints.events.empty()) {
    std::cerr << "lphi: lphid's data directory records no event socket (is lphid older than this lphi?)\n";
    return exit_failure;
  }
  // A subscriber cannot tell a silent daemon from an absent one: ask the
  // control socket first, which also checks the sample's name.
  const auto samples = ask_control(endpoints.control, {{"type", "samples"}}, timeout_ms(opt.connect_timeout_s));
  if (samples.outcome != ControlReply::Outcome::ok) {
    return report_failed_reply(samples, "samples", endpoints.control);
  }
  if (!opt.sample.empty()) {
    bool found = false;
    for (const auto& s : samples.body.value("samples", json::array())) {
      if (s.is_object() && s.value("name", "") == opt.sample) found = true;
    }
    if (!found) {
      std::cerr << "lphi: lphid has no sample named \"" << opt.sample << "\"\n";
      return exit_no_data;
    }
  }

  install_interrupt_handler();
  zmq::context_t context(1);
  zmq::socket_t socket(context, zmq::socket_type::sub);
  socket.set(zmq::sockopt::linger, 0);
  for (const auto& topic : topics) socket.set(zmq::sockopt::subscribe, topic);
  try {
    // Events published before the subscription reaches lphid are not
    // delivered; say when it has (scripts and tests wait for this line).
    if (connect_and_wait_for_handshake(context, socket, endpoints.events, timeout_ms(opt.connect_timeout_s))) {
      std::cerr << "lphi: watching lphid's events at " << endpoints.events << "\n";
    }
  } catch (const zmq::error_t& e) {
    std::cerr << "lphi: cannot connect to the event socket " << endpoints.events << ": " << e.what() << "\n";
    return exit_unreachable;
  }
  const auto deadline = opt.timeout_s > 0 ? Clock::now() + timeout_ms(opt.timeout_s) : Clock::time_point::max();
  long long shown = 0;
  while (!interrupted() && (opt.count == 0 || shown < opt.count) && Clock::now() < deadline) {
    zmq::pollitem_t item{socket.handle(), 0, ZMQ_POLLIN, 0};
    try {
      zmq::poll(&item, 1, std::chrono::milliseconds(200));
    } catch (const zmq::error_t& e) {
      if (e.num() == EINTR) continue;
      throw;
    }
    if (!(item.revents & ZMQ_POLLIN)) continue;
    zmq::message_t topic_frame, body_frame;
    if (!socket.recv(topic_frame, zmq::recv_flags::dontwait)) continue;
    if (!topic_frame.more()) continue;  // not an event of the protocol
    if (!socket.recv(body_frame, zmq::recv_flags::dontwait)) continue;
    while (body_frame.more()) {  // extra frames are not ours: drain them
      zmq::message_t extra;
      if (!socket.recv(extra, zmq::recv_flags::dontwait)) break;
      body_frame.move(extra);
    }
    const std::string topic(topic_frame.to_string_view());
    if (topics.count(topic) == 0) continue;  // a prefix match of another topic
    const json body = json::parse(body_frame.to_string_view(), nullptr, false);
    if (body.is_discarded()) {
      std::cerr << "lphi: an event on \"" << topic << "\" is not valid JSON; skipped\n";
      continue;
    }
    if (!concerns(body, opt.sample)) continue;
    if (opt.json) {
      std::cout << body.dump() << std::endl;
    } else {
      std::cout << event_line(topic, body) << std::endl;
    }
    ++shown;
  }
  if (opt.count > 0 && shown < opt.count && !interrupted()) {
    std::cerr << "lphi: " << shown << " of " << opt.count << " events before the timeout\n";
    return exit_no_data;
  }
  return exit_ok;
}

}  // namespace

void register_watch_command(CLI::App& app, int* exit_code) {
  auto* cmd = app.add_subcommand("watch", "print lphid's events (sweeps, fits, verdicts, alerts) as they happen");
  auto opt = std::make_shared<WatchOptions>();
  add_data_dir_option(*cmd, opt->data_dir);
  cmd->add_option("--sample", opt->sample, "only events of this sample");
  cmd->add_option("--topics", opt->topics, "comma-separated: alert, fit, verdict, sweep (default: all)");
  cmd->add_flag("--json", opt->json, "print each event's JSON body on one line");
  cmd->add_option("--count", opt->count, "stop after this many events")->check(CLI::PositiveNumber);
  cmd->add_option("--timeout-s", opt->timeout_s, "stop after this many seconds (0: until interrupted)")
      ->check(CLI::NonNegativeNumber);
  cmd->add_option("--connect-timeout-s", opt->connect_timeout_s, "seconds to wait for lphid to answer")
      ->check(CLI::PositiveNumber);
  cmd->callback([opt, exit_code] { *exit_code = run_watch(*opt); });
}

}  // namespace lphi::client
