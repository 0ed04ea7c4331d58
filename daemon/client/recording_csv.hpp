// The recorded-cooldown CSV that `lphi replay` streams into lphid: one row
// per instant, holding what a sample's three instruments read then.
//
// Columns (names as below, or mapped from the file's own names and units
// with ColumnMap, e.g. --column time_s=t_sec --column field_t=B:mT;
// daemon/client/column_map.hpp):
//   time_s                  required in every row: Unix seconds (>= 1e9) or
//                           seconds relative to the recording's start
//   temperature_k           the thermometer (empty: no reading in this row)
//   field_t                 the magnet (empty: no reading)
//   lockin_x_v, lockin_y_v  the lock-in, rms volts (both empty: no reading)
//   lockin_overload         optional column: 0/1 or false/true (or empty)
//   lockin_range_v          optional column: > 0 (or empty)
//   lockin_time_constant_s  optional column: > 0 (or empty)
// The first five columns must be in the header; other columns are ignored.
// The lexical rules are those of schema/text/csv_reader.hpp (header line,
// commas, RFC 4180 quotes, '#' comments, blank lines, CRLF, BOM).
//
// Every row is checked, after conversion to SI, as lphid checks a reading
// (schema/protocol/limits.hpp: the temperature and field bounds, finite
// values; a value beyond them is refused with the unit it was likely in),
// and time may not run backward nor mix Unix and relative times (the kind
// of the first row's time holds).
// A bad row is an error naming the file, line and column. The file is read
// as a stream (a long recording is not held in memory), so a replay reads
// it twice: scan_recording() first, then RecordingReader again to send.
#pragma once

#include <cstdint>
#include <istream>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "daemon/client/column_map.hpp"
#include "daemon/client/csv_table.hpp"
#include "schema/text/csv_reader.hpp"

namespace lphi::client {

// The canonical names, required ones first.
const std::vector<std::string>& recording_columns();
inline constexpr std::size_t recording_required_columns = 5;

// Adds one --column argument ("canonical=file_name[:unit]", column_map.hpp)
// to map. Error (naming the mapping) for a malformed one, an unknown
// canonical name or unit, or a name mapped twice.
Status add_column_mapping(const std::string& mapping, ColumnMap& map);

// Unix times start here: 1e9 s is 2001-09-09, before any recording lphi reads.
inline constexpr double unix_time_threshold_s = 1e9;

struct RecordingRow {
  std::size_t line = 0;  // in the file, 1-based
  double t_s = 0.0;      // as in the file (relative or Unix)
  std::optional<double> temperature_k;
  std::optional<double> field_t;
  bool has_lockin = false;
  double x_v = 0.0, y_v = 0.0;
  std::optional<bool> overload;
  std::optional<double> range_v, time_constant_s;
};

class RecordingReader {
 public:
  // Reads up to and including the header. source_name prefixes messages.
  Status open(std::istream& in, std::string source_name, const ColumnMap& map);
  // The next data row: true with `row` set, false at the end (status ok) or
  // at a bad row (status not ok, naming it).
  bool next(RecordingRow& row, Status& status);

 private:
  std::string where(std::size_t line, std::size_t canonical) const;
  std::optional<text::CsvReader> reader_;
  std::string source_name_;
  std::size_t header_cells_ = 0;
  // Per canonical column (recording_columns order): its index in the file.
  std::vector<std::optional<std::size_t>> index_;
  std::vector<std::string> file_names_;
  ColumnMap map_;
  std::optional<double> previous_t_;
  std::optional<bool> unix_times_;
  std::vector<std::string> cells_;
};

struct RecordingSummary {
  std::uint64_t rows = 0;
  std::uint64_t lockin_readings = 0;
  std::uint64_t thermometer_readings = 0;
  std::uint64_t field_readings = 0;
  double first_t_s = 0.0, last_t_s = 0.0;
  bool unix_times = false;
};

// Reads every row, checking it; the summary on success.
Status scan_recording(std::istream& in, const std::string& source_name, const ColumnMap& map,
                         RecordingSummary& out);

}  // namespace lphi::client
