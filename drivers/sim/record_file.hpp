// `lphi-sim SCENARIO --record FILE.csv`: the recording of drivers/sim/
// recording.hpp written as the CSV that `lphi replay` reads, and the truth
// file (drivers/sim/truth_file.hpp) with the same records a served run writes.
//
// CSV: a header line
//   time_s,temperature_k,field_t,lockin_x_v,lockin_y_v,lockin_overload
// then one line per row, numbers as %.12g, time relative (simulated seconds
// from 0), overload 0/1. A row without a thermometer reading has an empty
// temperature_k cell; a row inside a lock-in dropout has empty lock-in cells.
// Truth records appear in the order their stretches end (a sweep before a
// plateau ending at the same time); a served run writes the same lines, in
// the order its ticks see them end.
#pragma once

#include <cstdint>
#include <string>

#include "drivers/sim/recording.hpp"
#include "drivers/sim/scenario.hpp"

namespace lphi::sim {

struct RecordSummary {
  std::int64_t rows = 0;
  std::int64_t lockin_rows = 0;
  std::int64_t thermometer_rows = 0;
  double end_s = 0.0;
};

// Writes csv_path (and truth_path unless empty). Empty on success, else the
// reason, naming the file.
std::string write_recording(const Scenario& scenario, const RecordingOptions& options,
                            const std::string& csv_path, const std::string& truth_path,
                            RecordSummary& summary);

}  // namespace lphi::sim
