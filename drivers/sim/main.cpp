// lphi-sim: simulated lock-in, thermometer and magnet supply on loopback TCP
// ports, driven by a scenario file's sample model and cooldown programme.
#include <CLI/CLI.hpp>
#include <chrono>
#include <cmath>
#include <cstdlib>
#include <cstdio>
#include <string>

#include "drivers/sim/instruments.hpp"
#include "drivers/sim/record_file.hpp"
#include "drivers/sim/scenario_file.hpp"
#include "drivers/sim/server.hpp"
#include "schema/text/text.hpp"

namespace {

void print_commands() {
  using lphi::sim::Instrument;
  std::printf(
      "lphi-sim command tree. One command per line, terminated by \\n; headers are\n"
      "case-insensitive, short (MEAS) or long (MEASURE) form. A query that fails is\n"
      "answered \"ERR <code>,\\\"<message>\\\"\"; every error is also queued for SYST:ERR?.\n"
      "Set commands are not answered. Times are simulated seconds.\n");
  for (Instrument i : lphi::sim::kInstruments) {
    std::printf("\n%s:\n%s", lphi::sim::instrument_name(i),
                lphi::sim::SimInstrument::command_list(i).c_str());
  }
}

}  // namespace

int main(int argc, char** argv) {
  CLI::App app{"lphi-sim: a simulated cryostat (lock-in, thermometer, magnet) on TCP ports"};
  std::string scenario_path;
  lphi::sim::ServerOptions options;
  long long seed = -1;
  bool list_commands = false;
  std::string epoch_start;
  std::string record_path;
  lphi::sim::RecordingOptions recording;
  app.add_option("scenario", scenario_path, "scenario file (TOML)");
  app.add_option("--speed", options.speed, "simulated seconds per wall-clock second (default 1)");
  app.add_option("--seed", seed, "noise seed (default: the scenario's)");
  app.add_option("--truth", options.truth_path, "write the truth file (JSON lines) here");
  app.add_option("--ports-file", options.ports_file, "write the chosen ports here (JSON)");
  app.add_option("--duration-s", options.duration_s,
                 "stop after this many simulated seconds (default: at the programme's end)");
  app.add_option("--bind", options.bind, "address to listen on (default 127.0.0.1)");
  app.add_option("--epoch-start", epoch_start,
                 "make the instruments' clock read Unix time: T (seconds since the epoch) at the "
                 "start, or \"now\" for the wall-clock time at the start (default: 0, simulated seconds)");
  app.add_option("--record", record_path,
                 "do not serve: evaluate the scenario at the lock-in rate and write the CSV that "
                 "`lphi replay` reads (with --truth, the truth file too)");
  app.add_option("--rate-hz", recording.rate_hz,
                 "with --record: lock-in readings per simulated second (default 10)");
  app.add_option("--thermometer-every", recording.thermometer_every,
                 "with --record: a thermometer reading on every N-th row (default 1)");
  app.add_flag("--hold", options.hold, "keep serving the last state after the programme ends");
  app.add_flag("--list-commands", list_commands, "print the instruments' command tree and exit");
  CLI11_PARSE(app, argc, argv);

  if (list_commands) {
    print_commands();
    return 0;
  }
  if (scenario_path.empty()) {
    std::fprintf(stderr, "lphi-sim: a scenario file is needed (see drivers/sim/scenarios/)\n");
    return 2;
  }
  if (!std::isfinite(options.speed) || options.speed <= 0 || options.speed > 1e6) {
    std::fprintf(stderr, "lphi-sim: --speed must be > 0 and at most 1e6 (got %g)\n", options.speed);
    return 2;
  }
  if (!std::isfinite(options.duration_s) || options.duration_s < 0) {
    std::fprintf(stderr, "lphi-sim: --duration-s must be >= 0 (got %g)\n", options.duration_s);
    return 2;
  }
  if (epoch_start == "now") {
    options.epoch_start_s = std::floor(
        std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count());
  } else if (!epoch_start.empty()) {
    const auto epoch = lphi::text::parse_number(epoch_start);
    options.epoch_start_s = epoch.value_or(0.0);
    if (!epoch || options.epoch_start_s <= 0 || options.epoch_start_s > 1e10) {
      std::fprintf(stderr, "lphi-sim: --epoch-start must be \"now\" or a Unix time in (0, 1e10] (got \"%s\")\n",
                   epoch_start.c_str());
      return 2;
    }
  }
  if (!record_path.empty()) {
    if (options.hold || !options.ports_file.empty() || !epoch_start.empty()) {
      std::fprintf(stderr, "lphi-sim: --record does not serve: --hold, --ports-file and "
                           "--epoch-start cannot be used with it\n");
      return 2;
    }
    recording.duration_s = options.duration_s;
    if (auto e = lphi::sim::recording_error(recording); !e.empty()) {
      std::fprintf(stderr, "lphi-sim: %s\n", e.c_str());
      return 2;
    }
  } else if (app.count("--rate-hz") > 0 || app.count("--thermometer-every") > 0) {
    std::fprintf(stderr, "lphi-sim: --rate-hz and --thermometer-every need --record\n");
    return 2;
  }
  auto loaded = lphi::sim::load_scenario_file(scenario_path);
  if (!loaded.scenario) {
    std::fprintf(stderr, "lphi-sim: %s\n", loaded.error.c_str());
    return 2;
  }
  if (seed >= 0) loaded.scenario->seed = static_cast<std::uint64_t>(seed);
  if (!record_path.empty()) {
    lphi::sim::RecordSummary summary;
    if (auto e = lphi::sim::write_recording(*loaded.scenario, recording, record_path,
                                            options.truth_path, summary);
        !e.empty()) {
      std::fprintf(stderr, "lphi-sim: %s\n", e.c_str());
      return 1;
    }
    std::printf("lphi-sim: recorded %lld rows (%lld with the lock-in, %lld with the thermometer) "
                "over %.12g simulated s to %s\n",
                static_cast<long long>(summary.rows), static_cast<long long>(summary.lockin_rows),
                static_cast<long long>(summary.thermometer_rows), summary.end_s, record_path.c_str());
    return 0;
  }
  lphi::sim::SimServer server(std::move(*loaded.scenario), options);
  if (auto e = server.open(); !e.empty()) {
    std::fprintf(stderr, "lphi-sim: %s\n", e.c_str());
    return 1;
  }
  if (auto e = server.run(); !e.empty()) {
    std::fprintf(stderr, "lphi-sim: %s\n", e.c_str());
    return 1;
  }
  return 0;
}
