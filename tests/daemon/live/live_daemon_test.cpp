// The live analysis inside a real lphid: synthetic readings of a cooldown
// (tests/daemon/live/synthetic_cooldown.hpp) sent over the ingest socket with
// lphi_sender, the results asked for on the control socket, then lphid
// restarted on the same data directory: the same verdict, no fit computed
// again.
#include <gtest/gtest.h>

#include <chrono>
#include <cstdlib>
#include <fstream>
#include <map>
#include <thread>
#include <zmq.hpp>

#include "daemon/config/data_dir.hpp"
#include "drivers/sender/sender.hpp"
#include "daemon/client/control_request.hpp"
#include "tests/support/control_client.hpp"
#include "tests/support/daemon_process.hpp"
#include "tests/daemon/live/synthetic_cooldown.hpp"
#include "tests/support/temp_dir.hpp"

namespace {

using nlohmann::json;
using namespace std::chrono_literals;

std::string live_config() {
  return lphi::testing::test_config("gain = 100.0\nplateau_min_duration_s = 60.0\n");
}

// One request on the control socket, its reply (null after the timeout).
json ask(const std::string& data_dir, const json& request, std::chrono::milliseconds timeout = 5000ms) {
  zmq::context_t context(1);
  zmq::socket_t socket = lphi::testing::control_client(context, lphi::config::client_endpoints(data_dir).control);
  return lphi::testing::request_reply(socket, request, timeout);
}

// Polls {"type":"progress"} until the analysis is idle (bounded).
json wait_idle(const std::string& dir, std::chrono::seconds limit) {
  const auto until = std::chrono::steady_clock::now() + limit;
  json p;
  while (std::chrono::steady_clock::now() < until) {
    p = ask(dir, {{"type", "progress"}, {"sample", "film-a"}});
    if (p.is_object() && p.value("idle", false)) return p;
    std::this_thread::sleep_for(100ms);
  }
  return p;
}

// Counts the messages waiting on a SUB socket, by topic.
std::map<std::string, std::size_t> drain_events(zmq::socket_t& sub) {
  std::map<std::string, std::size_t> count;
  while (true) {
    zmq::pollitem_t item{sub.handle(), 0, ZMQ_POLLIN, 0};
    zmq::poll(&item, 1, 300ms);
    if (!(item.revents & ZMQ_POLLIN)) break;
    zmq::message_t topic, body;
    if (!sub.recv(topic, zmq::recv_flags::dontwait)) break;
    EXPECT_TRUE(topic.more()) << "an event is two frames";
    if (!sub.recv(body, zmq::recv_flags::dontwait)) break;
    const auto j = json::parse(body.to_string_view(), nullptr, false);
    EXPECT_TRUE(j.is_object()) << body.to_string();
    ++count[topic.to_string()];
  }
  return count;
}

zmq::socket_t subscribe(zmq::context_t& context, const std::string& dir) {
  zmq::socket_t sub(context, zmq::socket_type::sub);
  sub.set(zmq::sockopt::linger, 0);
  sub.set(zmq::sockopt::subscribe, "");
  // A subscription takes a moment to reach the publisher (ZeroMQ's "slow
  // joiner"); messages published before that are not delivered. Wait for the
  // handshake (after which the SUB sends its subscription), with a bound.
  EXPECT_TRUE(lphi::client::connect_and_wait_for_handshake(context, sub, lphi::config::client_endpoints(dir).events,
                                                           10s))
      << "the event socket never completed its handshake";
  return sub;
}

// Sends the cooldown's three streams, 20 s of event time per source in turn
// (as three instruments' programs would), and waits for every ack.
void send_cooldown(const std::string& dir, const lphi::live::testing::Cooldown& d) {
  zmq::context_t context(1);
  const std::string endpoint = lphi::config::client_endpoints(dir).ingest;
  auto make = [&](const char* source, lphi::protocol::SourceKind kind) {
    lphi::drivers::SenderOptions o;
    o.endpoint = endpoint;
    o.source = source;
    o.kind = kind;
    return std::make_unique<lphi::drivers::Sender>(context, o);
  };
  auto lockin = make("lockin-a", lphi::protocol::SourceKind::lockin);
  auto thermometer = make("mxc", lphi::protocol::SourceKind::thermometer);
  auto field = make("magnet", lphi::protocol::SourceKind::field);
  std::int64_t seq[3] = {0, 0, 0};
  lphi::drivers::Sender* senders[3] = {lockin.get(), thermometer.get(), field.get()};
  for (int k = 0; k < 3; ++k) {
    auto hello = senders[k]->hello(10s);
    ASSERT_TRUE(hello.has_value());
    seq[k] = hello->next_seq;
  }
  auto offer = [&](int k, const auto& reading) {
    while (!senders[k]->offer(reading)) senders[k]->pump(5ms);
  };
  std::size_t i = 0, j = 0, n = 0;
  for (double t = d.lockin.front().t_s; i < d.lockin.size() || j < d.thermometer.size() || n < d.field.size();
       t += 20.0) {
    for (; i < d.lockin.size() && d.lockin[i].t_s < t + 20.0; ++i) {
      const auto& r = d.lockin[i];
      lphi::protocol::LockinReading p;
      p.seq = seq[0]++;
      p.t = r.t_s;
      p.x_v = r.x_v;
      p.y_v = r.y_v;
      p.time_constant_s = r.time_constant_s;
      offer(0, p);
    }
    for (; j < d.thermometer.size() && d.thermometer[j].t_s < t + 20.0; ++j) {
      offer(1, lphi::protocol::ThermometerReading{seq[1]++, d.thermometer[j].t_s, d.thermometer[j].temperature_k, {}});
    }
    for (; n < d.field.size() && d.field[n].t_s < t + 20.0; ++n) {
      offer(2, lphi::protocol::FieldReading{seq[2]++, d.field[n].t_s, d.field[n].field_t});
    }
    for (auto* s : senders) s->pump(0ms);
  }
  for (auto* s : senders) {
    ASSERT_TRUE(s->flush(60s));
    EXPECT_EQ(s->totals().rejected, 0u);
  }
}

TEST(LiveDaemon, FitsAndVerdictFromSentReadingsSurviveARestart) {
  lphi::testing::TempDir dir;
  const std::string config_path = dir.file("lphid.toml");
  std::ofstream(config_path) << live_config();
  lphi::live::testing::CooldownPlan plan;
  plan.closing_ramp_t = 0.02;  // closes the last sweep
  const auto data = lphi::live::testing::make_cooldown(plan);

  lphi::testing::DaemonProcess daemon(dir.path(), config_path);
  ASSERT_TRUE(daemon.start());
  const json samples = ask(dir.path(), {{"type", "samples"}});
  ASSERT_TRUE(samples.is_object());
  ASSERT_EQ(samples.at("samples").size(), 1u);
  EXPECT_EQ(samples["samples"][0]["name"], "film-a");
  EXPECT_EQ(samples["samples"][0]["model"], "hln2d");

  zmq::context_t context(1);
  zmq::socket_t events = subscribe(context, dir.path());
  send_cooldown(dir.path(), data);
  const json progress = wait_idle(dir.path(), 60s);
  ASSERT_TRUE(progress.value("idle", false)) << progress.dump(1);
  for (const auto& s : progress.at("sources")) {
    EXPECT_EQ(s.at("committed_seq"), s.at("analysed_seq")) << s.dump();
  }

  const json fits = ask(dir.path(), {{"type", "fits"}, {"sample", "film-a"}});
  ASSERT_TRUE(fits.is_object()) << fits.dump();
  ASSERT_EQ(fits.at("fits").size(), data.sweep_temperature_k.size()) << fits.dump(1);
  for (std::size_t i = 0; i < fits["fits"].size(); ++i) {
    const json& f = fits["fits"][i];
    SCOPED_TRACE(f.dump());
    ASSERT_TRUE(f.at("ok").get<bool>());
    EXPECT_EQ(f.at("sample"), "film-a");
    for (const char* key : {"model", "lphi_m", "lphi_err_m", "alpha", "chi2_red", "n_points", "field_window_t",
                            "converged", "flags", "sweep_id", "temperature_k", "temperature_spread_k",
                            "t_start", "t_end", "used_in_dephasing"}) {
      EXPECT_TRUE(f.contains(key)) << key;
    }
    // L_phi within 5% and 5 standard errors of the truth the readings were
    // made from (as in the pipeline's unit test: the same readings).
    const double truth = lphi::live::testing::truth_lphi_m(plan, data.sweep_temperature_k[i]);
    const double lphi = f.at("lphi_m").get<double>(), err = f.at("lphi_err_m").get<double>();
    EXPECT_NEAR(lphi, truth, 5.0 * err);
    EXPECT_LT(std::abs(lphi / truth - 1.0), 0.05);
    EXPECT_DOUBLE_EQ(f.at("temperature_k").get<double>(), data.sweep_temperature_k[i]);
  }
  const json sweeps = ask(dir.path(), {{"type", "sweeps"}});
  ASSERT_EQ(sweeps.at("sweeps").size(), data.sweep_temperature_k.size());
  EXPECT_TRUE(sweeps["sweeps"][0].at("fitted").get<bool>());
  EXPECT_EQ(sweeps["sweeps"][0].at("direction"), "up");
  EXPECT_EQ(sweeps["sweeps"][1].at("direction"), "down");

  const json verdict = ask(dir.path(), {{"type", "verdict"}, {"sample", "film-a"}});
  ASSERT_EQ(verdict.at("verdicts").size(), 1u) << verdict.dump();
  const json v = verdict["verdicts"][0];
  EXPECT_EQ(v.at("sample"), "film-a");
  EXPECT_EQ(v.at("state"), "power-law") << v.dump(1);
  // p within 3 standard errors of the truth's 1.
  EXPECT_NEAR(v.at("exponent_p").get<double>(), plan.p, 3.0 * v.at("exponent_p_err").get<double>());
  for (const char* key : {"electrons_cooling", "likely_cause", "regime", "aak_ratio", "updated_at", "evidence"}) {
    EXPECT_TRUE(v.contains(key)) << key;
  }
  EXPECT_EQ(v.at("updated_at").get<double>(), fits["fits"].back().at("t_end").get<double>());
  // Each new sweep, fit and verdict was published once.
  const auto published = drain_events(events);
  const std::size_t n = data.sweep_temperature_k.size();
  EXPECT_EQ(published.count("sweep") ? published.at("sweep") : 0, n);
  EXPECT_EQ(published.count("fit") ? published.at("fit") : 0, n);
  EXPECT_EQ(published.count("verdict") ? published.at("verdict") : 0, n);

  // Restart: the readings are re-read, the stored fits reused.
  ASSERT_EQ(daemon.stop(), 0);
  ASSERT_TRUE(daemon.start());
  zmq::socket_t events_after = subscribe(context, dir.path());
  const json again = wait_idle(dir.path(), 60s);
  ASSERT_TRUE(again.value("idle", false)) << again.dump(1);
  EXPECT_EQ(again.at("fits_reused").get<std::size_t>(), data.sweep_temperature_k.size());
  EXPECT_EQ(again.at("fits").get<std::size_t>(), data.sweep_temperature_k.size());
  EXPECT_EQ(ask(dir.path(), {{"type", "fits"}, {"sample", "film-a"}}), fits);
  EXPECT_EQ(ask(dir.path(), {{"type", "sweeps"}}), sweeps);
  EXPECT_EQ(ask(dir.path(), {{"type", "verdict"}, {"sample", "film-a"}}), verdict);
  // Nothing is new after the restart: no sweep, fit or verdict is published
  // again (the history was re-read, not recomputed).
  EXPECT_TRUE(drain_events(events_after).empty());
  EXPECT_EQ(daemon.stop(), 0);
}

TEST(LiveDaemon, BadRequestsAreNamed) {
  lphi::testing::TempDir dir;
  const std::string config_path = dir.file("lphid.toml");
  std::ofstream(config_path) << live_config();
  lphi::testing::DaemonProcess daemon(dir.path(), config_path);
  ASSERT_TRUE(daemon.start());
  const json no_sample = ask(dir.path(), {{"type", "progress"}});
  EXPECT_EQ(no_sample.value("type", ""), "error") << no_sample.dump();
  EXPECT_NE(no_sample.dump().find("sample"), std::string::npos);
  const json unknown = ask(dir.path(), {{"type", "fits"}, {"sample", "no-such-film"}});
  EXPECT_EQ(unknown.value("type", ""), "error");
  EXPECT_NE(unknown.dump().find("no-such-film"), std::string::npos) << unknown.dump();
  const json wrong = ask(dir.path(), {{"type", "sweeps"}, {"sample", 3}});
  EXPECT_EQ(wrong.value("type", ""), "error");
  // A sample without fits has a verdict: insufficient data.
  const json verdict = ask(dir.path(), {{"type", "verdict"}});
  ASSERT_EQ(verdict.at("verdicts").size(), 1u) << verdict.dump();
  EXPECT_EQ(verdict["verdicts"][0].at("state"), "insufficient-data");
  EXPECT_EQ(verdict["verdicts"][0].at("electrons_cooling"), nullptr);
  const json other = ask(dir.path(), {{"type", "no-such-request"}});
  EXPECT_EQ(other.value("type", ""), "error");
  EXPECT_NE(other.dump().find("progress"), std::string::npos) << "the error lists the known types";
  EXPECT_EQ(daemon.stop(), 0);
}

// The string at `key`, or "" (no from_json on a maybe-missing key).
std::string text_of(const json& j, const char* key) {
  if (!j.is_object() || !j.contains(key)) return "";
  const auto* text = j.at(key).get_ptr<const std::string*>();
  return text != nullptr ? *text : std::string();
}

// The exception barrier of a sample's thread, through a real lphid: the
// fault-injection hook (LPHI_FAULT_THROW_AT_SWEEP, sample_worker.hpp) makes
// film-a's analysis throw at its sweep 1. lphid keeps running and acking,
// `status` lists the failed part, film-a's progress carries the error, and
// film-b, fed by the same sources, is analysed to the end.
TEST(LiveDaemon, ASampleWhoseAnalysisThrowsStopsAloneAndIsListedAsFailed) {
  lphi::testing::TempDir dir;
  const std::string config_path = dir.file("lphid.toml");
  const std::string film_b =
      "\n" + lphi::testing::test_sample("film-b", "gain = 100.0\nplateau_min_duration_s = 60.0\n");
  std::ofstream(config_path) << lphi::testing::test_config("gain = 100.0\nplateau_min_duration_s = 60.0\n", film_b);
  lphi::live::testing::CooldownPlan plan;
  plan.closing_ramp_t = 0.02;
  const auto data = lphi::live::testing::make_cooldown(plan);
  ASSERT_GT(data.sweep_temperature_k.size(), 2u);

  ::setenv("LPHI_FAULT_THROW_AT_SWEEP", "film-a:1", 1);
  lphi::testing::DaemonProcess daemon(dir.path(), config_path);
  const bool started = daemon.start();
  ::unsetenv("LPHI_FAULT_THROW_AT_SWEEP");
  ASSERT_TRUE(started);
  send_cooldown(dir.path(), data);  // every batch acknowledged, none refused

  // film-a fails (bounded wait), listed in status with its error.
  json failed;
  for (int i = 0; i < 600 && failed.is_null(); ++i) {
    const json status = ask(dir.path(), {{"type", "status"}});
    ASSERT_TRUE(status.is_object()) << "lphid answers status";
    ASSERT_TRUE(status.contains("failed_parts")) << status.dump();
    for (const auto& part : status.at("failed_parts")) {
      if (text_of(part, "part") == "sample:film-a") failed = part;
    }
    if (failed.is_null()) std::this_thread::sleep_for(100ms);
  }
  ASSERT_TRUE(failed.is_object()) << "film-a is listed as failed";
  EXPECT_NE(text_of(failed, "error").find("sweep 1"), std::string::npos) << failed.dump();
  EXPECT_TRUE(failed.at("at").is_number()) << failed.dump();
  const json a = ask(dir.path(), {{"type", "progress"}, {"sample", "film-a"}});
  EXPECT_FALSE(a.value("idle", true)) << a.dump();
  EXPECT_NE(text_of(a, "error").find("fault injection"), std::string::npos) << a.dump();

  // film-b goes on to the end: every sweep fitted.
  json b;
  for (int i = 0; i < 600; ++i) {
    b = ask(dir.path(), {{"type", "progress"}, {"sample", "film-b"}});
    if (b.is_object() && b.value("idle", false)) break;
    std::this_thread::sleep_for(100ms);
  }
  ASSERT_TRUE(b.value("idle", false)) << b.dump(1);
  EXPECT_FALSE(b.contains("error")) << b.dump();
  const json fits_b = ask(dir.path(), {{"type", "fits"}, {"sample", "film-b"}});
  EXPECT_EQ(fits_b.at("fits").size(), data.sweep_temperature_k.size());
  // film-a stored what it fitted before sweep 1 and nothing after.
  const json fits_a = ask(dir.path(), {{"type", "fits"}, {"sample", "film-a"}});
  EXPECT_LT(fits_a.at("fits").size(), data.sweep_temperature_k.size()) << fits_a.dump(1);

  // Ingest still acknowledges after the failure.
  zmq::context_t context(1);
  lphi::drivers::SenderOptions o;
  o.endpoint = lphi::config::client_endpoints(dir.path()).ingest;
  o.source = "mxc";
  o.kind = lphi::protocol::SourceKind::thermometer;
  lphi::drivers::Sender sender(context, o);
  const auto hello = sender.hello(10s);
  ASSERT_TRUE(hello.has_value());
  const double t_last = data.thermometer.back().t_s;
  ASSERT_TRUE(sender.offer(lphi::protocol::ThermometerReading{hello->next_seq, t_last + 1.0, 0.1, {}}));
  ASSERT_TRUE(sender.flush(10s));
  EXPECT_EQ(sender.totals().rejected, 0u);
  EXPECT_EQ(daemon.stop(), 0);
}

}  // namespace
