// lphid running scpi-tcp drivers against a real lphi-sim (accelerated, with
// an epoch clock), all over loopback TCP: readings of all three instruments
// are stored with the instruments' own simulated times, a lock-in dropout
// shows in `lphi status` and heals, and a simulator that dies never blocks
// lphid. Every wait is bounded.
#include <gtest/gtest.h>
#include <signal.h>
#include <sys/stat.h>

#include <chrono>
#include <cmath>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include "tests/daemon/hookup/store_export.hpp"
#include "tests/support/daemon_process.hpp"
#include "tests/support/wall_clock.hpp"
#include "tests/support/sim_process.hpp"

namespace lphi::testing {
namespace {

using namespace std::chrono_literals;
using nlohmann::json;
using Clock = std::chrono::steady_clock;

// One [[source]] with a scpi-tcp driver asking MEAS:ALL? (reply layout from
// drivers/sim/COMMANDS.md; field 0 is the instrument's time).
std::string driver_source(const std::string& name, const std::string& kind, int port,
                          const std::vector<std::string>& quantities) {
  std::string s = "[[source]]\nname = \"" + name + "\"\nkind = \"" + kind +
                  "\"\ndriver = \"scpi-tcp\"\naddress = \"127.0.0.1:" + std::to_string(port) +
                  "\"\npoll_interval_ms = 50\nreply_timeout_ms = 500\nstall_after_ms = 1000\n"
                  "reconnect_min_ms = 50\nreconnect_max_ms = 300\n"
                  // The simulated clock runs ahead of lphid's at --speed.
                  "time_future_tolerance_s = 1e7\n"
                  "[[source.query]]\nsend = \"MEAS:ALL?\"\n";
  for (std::size_t i = 0; i < quantities.size(); ++i) {
    if (quantities[i].empty()) continue;
    s += "[[source.query.field]]\nindex = " + std::to_string(i) + "\nquantity = \"" + quantities[i] + "\"\n";
  }
  return s;
}

std::string config_for(const SimProcess& sim) {
  return driver_source("lockin", "lockin", sim.port("lockin"), {"time_s", "x_v", "y_v", "overload"}) +
         driver_source("mxc", "thermometer", sim.port("thermometer"), {"time_s", "temperature_k", "resistance_ohm"}) +
         driver_source("magnet", "field", sim.port("magnet"), {"time_s", "field_t"});
}

const json* find_by(const json& list, const char* key, const std::string& value) {
  for (const auto& e : list) {
    if (e.value(key, "") == value) return &e;
  }
  return nullptr;
}

std::uint64_t accepted(const json& status, const std::string& source) {
  const json* s = find_by(status.at("sources"), "name", source);
  return s ? s->value("accepted", std::uint64_t{0}) : 0;
}

// Waits (bounded) until `done(status)` holds.
template <class F>
std::optional<json> wait_for_status(const DaemonProcess& d, std::chrono::seconds limit, F done) {
  const auto deadline = Clock::now() + limit;
  std::optional<json> last;
  while (Clock::now() < deadline) {
    last = d.status(2s);
    if (last && done(*last)) return last;
    std::this_thread::sleep_for(50ms);
  }
  return std::nullopt;
}

struct Rig {
  SimProcess sim;
  std::string data_dir;
  std::unique_ptr<DaemonProcess> daemon;
  double epoch_start = 0.0;

  bool start(const std::string& scenario_path, double speed) {
    epoch_start = std::floor(unix_now());
    if (!sim.start(scenario_path, {"--speed", std::to_string(speed), "--hold", "--epoch-start",
                                   std::to_string(static_cast<long long>(epoch_start))})) {
      return false;
    }
    data_dir = sim.dir() + "/data";
    if (::mkdir(data_dir.c_str(), 0700) != 0) return false;
    const std::string config = sim.write_file("lphid.toml", config_for(sim));
    daemon = std::make_unique<DaemonProcess>(data_dir, config);
    return daemon->start();
  }
  std::string log() const { return slurp(data_dir + "/lphid.log"); }
};

std::string scenario_file(const std::string& name) {
  return std::string(LPHI_SOURCE_DIR) + "/drivers/sim/scenarios/" + name;
}

TEST(Hookup, StoresAllThreeInstrumentsWithTheirSimulatedTimes) {
  Rig rig;
  const double speed = 100.0;
  ASSERT_TRUE(rig.start(scenario_file("saturation.toml"), speed)) << rig.sim.stderr_text();
  const auto enough = wait_for_status(*rig.daemon, 30s, [](const json& s) {
    return accepted(s, "lockin") >= 40 && accepted(s, "mxc") >= 40 && accepted(s, "magnet") >= 40;
  });
  ASSERT_TRUE(enough) << rig.log();
  const auto later = wait_for_status(*rig.daemon, 30s, [&](const json& s) {
    return accepted(s, "lockin") >= accepted(*enough, "lockin") + 20;
  });
  ASSERT_TRUE(later) << "the counts keep growing\n" << rig.log();
  // The newest stored t advances at --speed times the wall clock. Each t is
  // quantized by the 50 ms poll (5 simulated s at 100x) on either end of a
  // 3 s span (300 s): 10 % covers that and the loopback's delays.
  auto lockin_last_t = [&](double& wall) {
    const auto st = rig.daemon->status(2s);
    wall = unix_now();
    return st ? find_by(st->at("sources"), "name", "lockin")->at("last_t").get<double>() : std::nan("");
  };
  double w1 = 0, w2 = 0;
  const double last1 = lockin_last_t(w1);
  std::this_thread::sleep_for(3s);
  const double last2 = lockin_last_t(w2);
  EXPECT_NEAR((last2 - last1) / (w2 - w1), speed, 0.1 * speed);

  // Each driver is connected and has the simulator's identity (COMMANDS.md).
  for (const auto& [source, model] : {std::pair{"lockin", "SIM-LIA"}, std::pair{"mxc", "SIM-THERM"},
                                      std::pair{"magnet", "SIM-MAGNET"}}) {
    const json* d = find_by(later->at("drivers"), "source", source);
    ASSERT_NE(d, nullptr) << later->dump(2);
    EXPECT_EQ(d->value("state", ""), "connected") << d->dump(2);
    EXPECT_EQ(d->value("identity", ""), std::string("lphi-sim,") + model + ",0,0.1");
    EXPECT_EQ(d->at("faults").value("reply_timeouts", 1), 0u);
    EXPECT_EQ(d->at("faults").value("garbage_replies", 1), 0u);
  }
  // A source that lphid reads itself takes nothing from the ingest socket
  // (its sequence numbers are the driver's).
  const std::string line = rig.sim.write_file("one.jsonl", "{\"t\": " + std::to_string(unix_now()) +
                                                             ", \"temperature_k\": 0.1}\n");
  const auto sent = run_program({LPHI_PATH, "send", "--data-dir", rig.data_dir, "--source", "mxc",
                                 "--timeout", "5"},
                                line, 30s);
  EXPECT_NE(sent.exit_code, 0) << sent.out;
  EXPECT_NE((sent.out + sent.err).find("source_has_driver"), std::string::npos) << sent.out << sent.err;
  ASSERT_EQ(rig.daemon->stop(), 0);

  // Lock-in: X = I N g / sigma_sq. Ohm's law with the scenario's classical
  // sheet resistance (10 nA, 1500 ohm, 5 squares, gain 100) gives 7.5 mV.
  // Weak localization only lowers the conductance near zero field, by
  // (e^2/(pi h)) R_sq ~ 1.8 % of it per unit of ln(L_phi/l)-like logarithm,
  // which is below ~10 units for this film; the ln T interaction term is
  // +0.3 % at 1.2 K. So X lies between 7.5 mV (2 % for noise below) and
  // 1.3 x 7.5 mV; Y is the scenario's quadrature fraction (1 %) of X.
  const auto lockin = export_readings(rig.data_dir, "lockin");
  ASSERT_GE(lockin.size(), 60u);
  for (const auto& r : lockin) {
    EXPECT_GT(r.at("x_v").get<double>(), 0.98 * 7.5e-3) << r.dump();
    EXPECT_LT(r.at("x_v").get<double>(), 1.3 * 7.5e-3) << r.dump();
    EXPECT_LT(std::fabs(r.at("y_v").get<double>()), 0.1 * r.at("x_v").get<double>()) << r.dump();
  }
  // Sequence numbers start at 0 (an empty store) and have no holes.
  for (std::size_t i = 0; i < lockin.size(); ++i) EXPECT_EQ(lockin[i].at("seq").get<std::int64_t>(), std::int64_t(i));

  // Thermometer: the programme starts at 1.2 K and cools to 1.0 K first
  // (saturation.toml); the first ~minute of wall time at 100x stays there.
  const auto mxc = export_readings(rig.data_dir, "mxc");
  ASSERT_GE(mxc.size(), 40u);
  for (const auto& r : mxc) {
    EXPECT_GT(r.at("temperature_k").get<double>(), 0.9) << r.dump();
    EXPECT_LT(r.at("temperature_k").get<double>(), 1.3) << r.dump();
    EXPECT_GT(r.at("resistance_ohm").get<double>(), 0.0) << r.dump();
  }
  // Magnet: within the scenario's limit_t = 1 T (plus noise).
  const auto magnet = export_readings(rig.data_dir, "magnet");
  ASSERT_GE(magnet.size(), 40u);
  for (const auto& r : magnet) EXPECT_LE(std::fabs(r.at("field_t").get<double>()), 1.01) << r.dump();

  // Times are the simulator's epoch clock: they start at --epoch-start (lphid
  // starts within a few wall seconds of lphi-sim) and only go forward.
  const double t0 = lockin.front().at("t").get<double>();
  EXPECT_GE(t0, rig.epoch_start);
  EXPECT_LT(t0, rig.epoch_start + speed * 30.0);
  for (std::size_t i = 1; i < lockin.size(); ++i) {
    EXPECT_GT(lockin[i].at("t").get<double>(), lockin[i - 1].at("t").get<double>());
  }
  // The identities are stored too (instrument_identities, migration 2): the
  // status of a restarted lphid would show them; here, the log names them.
  EXPECT_NE(rig.log().find("identifies as \"lphi-sim,SIM-LIA,0,0.1\""), std::string::npos);
}

TEST(Hookup, ALockinDropoutShowsInStatusAndHeals) {
  // saturation.toml with one lock-in dropout (close mode) from 400 to 1400
  // simulated s: 4 s to 14 s of wall time at 100x.
  SimProcess scratch;
  std::string text = slurp(scenario_file("saturation.toml"));
  text += "\n[[fault]]\nkind = \"lockin-dropout\"\nstart_s = 400\nduration_s = 1000\n";
  const std::string scenario = scratch.write_file("dropout.toml", text);
  Rig rig;
  ASSERT_TRUE(rig.start(scenario, 100.0)) << rig.sim.stderr_text();

  const auto lost = wait_for_status(*rig.daemon, 30s, [](const json& s) {
    const json* d = find_by(s.at("drivers"), "source", "lockin");
    return d && d->value("state", "") != "connected" && d->at("faults").value("disconnects", 0) > 0;
  });
  ASSERT_TRUE(lost) << rig.log();
  // The thermometer is not affected.
  EXPECT_EQ(find_by(lost->at("drivers"), "source", "mxc")->value("state", ""), "connected");
  // What a person sees: `lphi status` names the lock-in's state and error.
  const auto human = run_program({LPHI_PATH, "status", "--data-dir", rig.data_dir}, "", 10s);
  EXPECT_EQ(human.exit_code, 0) << human.err;
  EXPECT_NE(human.out.find("last error:"), std::string::npos) << human.out;
  const std::uint64_t before = accepted(*lost, "lockin");

  const auto healed = wait_for_status(*rig.daemon, 40s, [&](const json& s) {
    const json* d = find_by(s.at("drivers"), "source", "lockin");
    return d && d->value("state", "") == "connected" && accepted(s, "lockin") >= before + 20;
  });
  ASSERT_TRUE(healed) << rig.log();
  const json* d = find_by(healed->at("drivers"), "source", "lockin");
  EXPECT_GE(d->at("faults").value("reconnects", 0), 1u);
  // No reading was made while the instrument was away, so no gap in seq.
  EXPECT_EQ(healed->at("counters").value("gaps", 1), 0u);
  EXPECT_EQ(rig.daemon->stop(), 0);
}

TEST(Hookup, ASimulatorThatDiesNeverBlocksLphid) {
  Rig rig;
  ASSERT_TRUE(rig.start(scenario_file("saturation.toml"), 100.0)) << rig.sim.stderr_text();
  ASSERT_TRUE(wait_for_status(*rig.daemon, 30s, [](const json& s) { return accepted(s, "lockin") >= 5; }));
  EXPECT_EQ(rig.sim.stop(), 0);
  // Every status request is answered promptly while the drivers retry.
  const auto deadline = Clock::now() + 3s;
  int answered = 0;
  while (Clock::now() < deadline) {
    const auto t = Clock::now();
    const auto s = rig.daemon->status(2s);
    ASSERT_TRUE(s) << "lphid did not answer status";
    EXPECT_LT(Clock::now() - t, 1s);
    ++answered;
    std::this_thread::sleep_for(100ms);
  }
  EXPECT_GE(answered, 10);
  const auto down = wait_for_status(*rig.daemon, 10s, [](const json& s) {
    for (const auto& d : s.at("drivers")) {
      if (d.value("state", "") == "connected" || d.value("state", "") == "stalled") return false;
    }
    return true;
  });
  EXPECT_TRUE(down) << "all drivers notice the loss";
  const auto human = run_program({LPHI_PATH, "status", "--data-dir", rig.data_dir}, "", 10s);
  EXPECT_EQ(human.exit_code, 0) << human.err;
  // lphid stops cleanly with its instruments gone.
  const auto t = Clock::now();
  EXPECT_EQ(rig.daemon->stop(), 0);
  EXPECT_LT(Clock::now() - t, 10s);
}

TEST(Hookup, ReadingsFarAheadOfTheClockAreRefusedWithoutTheSourcesTolerance) {
  // The simulated clock starts 2e5 s ahead; lphid's default tolerance is
  // 86400 s ([ingest] time_future_tolerance_s), the lock-in's own is 1e7 s.
  SimProcess sim;
  const double ahead = std::floor(unix_now()) + 2e5;
  ASSERT_TRUE(sim.start(scenario_file("saturation.toml"),
                        {"--speed", "100", "--hold", "--epoch-start", std::to_string(static_cast<long long>(ahead))}))
      << sim.stderr_text();
  std::string config = config_for(sim);
  const auto cut = config.find("time_future_tolerance_s", config.find("name = \"mxc\""));
  config.erase(cut, config.find('\n', cut) - cut + 1);
  const std::string data_dir = sim.dir() + "/data";
  ASSERT_EQ(::mkdir(data_dir.c_str(), 0700), 0);
  DaemonProcess daemon(data_dir, sim.write_file("lphid.toml", config));
  ASSERT_TRUE(daemon.start());
  const auto s = wait_for_status(daemon, 30s, [](const json& st) {
    return accepted(st, "lockin") >= 10 &&
           st.at("counters").at("rejected_readings").value("time_out_of_range", 0) >= 10;
  });
  ASSERT_TRUE(s) << slurp(data_dir + "/lphid.log");
  EXPECT_EQ(accepted(*s, "mxc"), 0u);
  EXPECT_EQ(daemon.stop(), 0);
}

}  // namespace
}  // namespace lphi::testing
