// The drivers against lphi-sim: its lock-in, thermometer and magnet polled
// over their own SCPI command trees (drivers/sim/COMMANDS.md, MEASure:ALL?),
// configured only through ScpiTcpConfig, as lphid will do.
#include <gtest/gtest.h>

#include <cmath>
#include <nlohmann/json.hpp>
#include <thread>

#include "tests/drivers/instrument/collector.hpp"
#include "drivers/instrument/scpi_tcp_driver.hpp"
#include "tests/drivers/instrument/script_server.hpp"
#include "tests/support/sim_process.hpp"


namespace lphi::drivers {
namespace {

using namespace std::chrono_literals;
using testing::Collector;
using testing::run_until;

ScpiTcpConfig sim_config(std::string source, protocol::SourceKind kind, int port,
                         std::vector<FieldMap> fields) {
  ScpiTcpConfig c;
  c.source = std::move(source);
  c.kind = kind;
  c.connection.port = static_cast<std::uint16_t>(port);
  c.poll_interval = 20ms;
  c.reply_timeout = 1000ms;
  c.backoff.min_delay = 10ms;
  c.backoff.max_delay = 100ms;
  c.queries = {{"MEASure:ALL?", std::move(fields)}};
  return c;
}

TEST(DriversAgainstSim, PollLockinThermometerAndMagnet) {
  // lphi-sim at 50 times real time, held after its programme; started by the
  // tests' one launcher, which waits (bounded) for its ports file.
  lphi::testing::SimProcess sim;
  ASSERT_TRUE(sim.start(std::string(LPHI_SOURCE_DIR) + "/drivers/sim/scenarios/saturation.toml",
                        {"--speed", "50", "--hold"}))
      << "lphi-sim did not start: " << sim.stderr_text();
  boost::asio::io_context io;
  Collector<protocol::LockinReading> lockin;
  Collector<protocol::ThermometerReading> thermometer;
  Collector<protocol::FieldReading> magnet;
  std::vector<std::string> identities;
  auto make = [&](ScpiTcpConfig c, ReadingSink sink) {
    DriverHooks hooks;
    hooks.sink = std::move(sink);
    hooks.on_identity = [&](std::string_view id) { identities.emplace_back(id); };
    std::string error;
    auto d = ScpiTcpDriver::create(io, std::move(c), std::move(hooks), &error);
    EXPECT_TRUE(d) << error;
    if (d) d->start();
    return d;
  };
  using K = protocol::SourceKind;
  // MEASure:ALL? replies (COMMANDS.md): lock-in <t>,<x_v>,<y_v>,<overload>;
  // thermometer <t>,<temperature_k>,<resistance_ohm>; magnet <t>,<field_t>,...
  auto l = make(sim_config("sim-lockin", K::lockin, sim.port("lockin"),
                           {{1, "", "x_v", 1.0}, {2, "", "y_v", 1.0}, {3, "", "overload", 1.0}}),
                lockin.sink());
  auto t = make(sim_config("sim-thermometer", K::thermometer, sim.port("thermometer"),
                           {{1, "", "temperature_k", 1.0}, {2, "", "resistance_ohm", 1.0}}),
                thermometer.sink());
  auto m = make(sim_config("sim-magnet", K::field, sim.port("magnet"), {{1, "", "field_t", 1.0}}),
                magnet.sink());
  ASSERT_TRUE(l && t && m);
  ASSERT_TRUE(run_until(io, [&] {
    return lockin.got.size() >= 10 && thermometer.got.size() >= 10 && magnet.got.size() >= 10;
  }, 20s));
  ASSERT_EQ(identities.size(), 3u);
  for (const auto& id : identities) EXPECT_EQ(id.rfind("lphi-sim,", 0), 0u) << id;
  for (const auto* d : {static_cast<InstrumentDriver*>(l.get()), static_cast<InstrumentDriver*>(t.get()),
                        static_cast<InstrumentDriver*>(m.get())}) {
    const auto s = d->status();
    EXPECT_EQ(s.faults, FaultCounters{}) << s.source << ": " << s.last_error;
  }
  lockin.expect_contiguous_from(1);
  thermometer.expect_contiguous_from(1);
  magnet.expect_contiguous_from(1);
  // Physical bounds, not the simulator's numbers: a dilution-refrigerator
  // thermometer reads between 0 and room temperature, a lab superconducting
  // magnet stays below 20 T (common practice), a lock-in gives finite volts.
  for (const auto& r : thermometer.got) {
    EXPECT_GT(r.temperature_k, 0.0);
    EXPECT_LT(r.temperature_k, 300.0);
    EXPECT_GT(*r.resistance_ohm, 0.0);
  }
  for (const auto& r : magnet.got) EXPECT_LT(std::fabs(r.field_t), 20.0);
  for (const auto& r : lockin.got) {
    EXPECT_TRUE(std::isfinite(r.x_v));
    EXPECT_TRUE(r.overload.has_value());
  }
  l->stop();
  t->stop();
  m->stop();
  run_until(io, [&] { return m->status().state == DriverState::stopped; }, 5s);
}

}  // namespace
}  // namespace lphi::drivers
