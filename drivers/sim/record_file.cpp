#include "drivers/sim/record_file.hpp"

#include <fmt/format.h>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <memory>
#include <vector>

#include "drivers/sim/instruments.hpp"
#include "drivers/sim/truth_file.hpp"

namespace lphi::sim {
namespace {

struct FileCloser {
  void operator()(std::FILE* f) const { std::fclose(f); }
};
using File = std::unique_ptr<std::FILE, FileCloser>;

std::string cannot_write(const std::string& what, const std::string& path) {
  return "cannot write " + what + " '" + path + "': " + std::strerror(errno);
}

// The truth records of the stretches that end at or before end_s, in the
// order they end (a sweep first when a sweep and a plateau end together).
std::vector<std::string> truth_lines(const World& world, double end_s) {
  std::vector<std::string> lines{truth::scenario_record(world.scenario())};
  const auto& sweeps = world.schedule().sweeps();
  const auto& plateaus = world.schedule().plateaus();
  std::size_t s = 0, p = 0;
  while (true) {
    const bool sweep_next = s < sweeps.size() && sweeps[s].end_s <= end_s;
    const bool plateau_next = p < plateaus.size() && plateaus[p].end_s <= end_s;
    if (sweep_next && (!plateau_next || sweeps[s].end_s <= plateaus[p].end_s)) {
      lines.push_back(truth::sweep_record(world, sweeps[s++]));
    } else if (plateau_next) {
      lines.push_back(truth::plateau_record(world, plateaus[p++]));
    } else {
      break;
    }
  }
  return lines;
}

}  // namespace

std::string write_recording(const Scenario& scenario, const RecordingOptions& options,
                            const std::string& csv_path, const std::string& truth_path,
                            RecordSummary& summary) {
  if (auto e = recording_error(options); !e.empty()) return e;
  if (auto e = scenario_error(scenario); !e.empty()) return "scenario: " + e;
  World world(scenario);
  // The lock-in's settings exactly as the served instrument holds them.
  const SimInstrument lockin(Instrument::lockin, world, 1.0);
  const Recorder recorder(world, options, lockin.range_v(), lockin.time_constant_s());

  std::vector<char> buffer(1 << 16);  // declared first: it outlives the stream
  File csv(std::fopen(csv_path.c_str(), "w"));
  if (!csv) return cannot_write("recording", csv_path);
  std::setvbuf(csv.get(), buffer.data(), _IOFBF, buffer.size());
  // The time constant is a column only when a fault changes it: without one
  // the recording is the one lphi-sim has always written.
  const bool with_tau = !scenario.faults.time_constants.empty();
  std::fputs(with_tau ? "time_s,temperature_k,field_t,lockin_x_v,lockin_y_v,lockin_overload,"
                        "lockin_time_constant_s\n"
                      : "time_s,temperature_k,field_t,lockin_x_v,lockin_y_v,lockin_overload\n",
             csv.get());
  summary = {};
  summary.end_s = recorder.end_s();
  std::string row_text;
  for (std::int64_t k = 0; k < recorder.rows(); ++k) {
    const RecordedRow r = recorder.row(k);
    row_text.clear();
    fmt::format_to(std::back_inserter(row_text), "{:.12g},", r.t_s);
    if (r.has_temperature) fmt::format_to(std::back_inserter(row_text), "{:.12g}", r.temperature_k);
    fmt::format_to(std::back_inserter(row_text), ",{:.12g},", r.field_t);
    if (r.has_lockin) {
      fmt::format_to(std::back_inserter(row_text), "{:.12g},{:.12g},{}", r.lockin.x_v, r.lockin.y_v,
                     r.lockin.overload ? 1 : 0);
      if (with_tau) fmt::format_to(std::back_inserter(row_text), ",{:.12g}", r.time_constant_s);
      row_text.push_back('\n');
    } else {
      row_text.append(with_tau ? ",,,\n" : ",,\n");
    }
    std::fputs(row_text.c_str(), csv.get());
    ++summary.rows;
    summary.lockin_rows += r.has_lockin ? 1 : 0;
    summary.thermometer_rows += r.has_temperature ? 1 : 0;
  }
  if (std::fflush(csv.get()) != 0 || std::ferror(csv.get())) return cannot_write("recording", csv_path);
  if (std::fclose(csv.release()) != 0) return cannot_write("recording", csv_path);

  if (!truth_path.empty()) {
    File truth(std::fopen(truth_path.c_str(), "w"));
    if (!truth) return cannot_write("truth file", truth_path);
    for (const std::string& line : truth_lines(world, recorder.end_s())) {
      std::fputs(line.c_str(), truth.get());
      std::fputc('\n', truth.get());
    }
    if (std::fflush(truth.get()) != 0 || std::ferror(truth.get()))
      return cannot_write("truth file", truth_path);
    if (std::fclose(truth.release()) != 0) return cannot_write("truth file", truth_path);
  }
  return {};
}

}  // namespace lphi::sim
