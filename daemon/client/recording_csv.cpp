#include "daemon/client/recording_csv.hpp"

#include <algorithm>
#include <cmath>
#include <set>

#include "daemon/client/format.hpp"
#include "schema/protocol/limits.hpp"
#include "schema/text/text.hpp"

namespace lphi::client {

namespace {

enum Column : std::size_t {
  time_s,
  temperature_k,
  field_t,
  lockin_x_v,
  lockin_y_v,
  lockin_overload,
  lockin_range_v,
  lockin_time_constant_s,
  column_count
};


}  // namespace

const std::vector<std::string>& recording_columns() {
  static const std::vector<std::string> names = {
      "time_s",          "temperature_k",  "field_t",       "lockin_x_v", "lockin_y_v",
      "lockin_overload", "lockin_range_v", "lockin_time_constant_s"};
  return names;
}

Status add_column_mapping(const std::string& mapping, ColumnMap& map) {
  return map.add(mapping, recording_columns(), "a recording");
}

Status RecordingReader::open(std::istream& in, std::string source_name, const ColumnMap& map) {
  *this = RecordingReader{};
  source_name_ = std::move(source_name);
  map_ = map;
  reader_.emplace(in, source_name_);
  std::vector<std::string> header;
  if (auto s = reader_->read_header(header); !s.ok()) return s;
  const std::size_t line = reader_->line();
  header_cells_ = header.size();
  index_.assign(column_count, std::nullopt);
  file_names_.assign(column_count, {});
  const auto& names = recording_columns();
  for (std::size_t c = 0; c < column_count; ++c) {
    file_names_[c] = map.file_name(names[c]);
    for (std::size_t i = 0; i < header.size(); ++i) {
      if (header[i] == file_names_[c]) index_[c] = i;
    }
    if (!index_[c] && c < recording_required_columns) {
      std::string message = reader_->at_line(line) + ": no column '" + file_names_[c] + "'";
      if (map.renamed(names[c])) message += " (given for " + names[c] + " by --column)";
      message += "; a recording needs time_s, temperature_k, field_t, lockin_x_v, lockin_y_v"
                 " (map other names with --column " + names[c] + "=NAME, or NAME:UNIT)";
      message += text::CsvReader::delimiter_note(header);
      return Status::invalid_input(message);
    }
  }
  return Status::success();
}

std::string RecordingReader::where(std::size_t line, std::size_t canonical) const {
  return source_name_ + " line " + std::to_string(line) + ", column " +
         map_.describe(recording_columns()[canonical]);
}

bool RecordingReader::next(RecordingRow& row, Status& status) {
  status = Status::success();
  if (!reader_) {
    status = Status::invalid_input("recording not opened");
    return false;
  }
  while (reader_->next(cells_, status)) {
    const std::size_t line = reader_->line();
    auto fail = [&](std::string message) {
      status = Status::invalid_input(std::move(message));
      return false;
    };
    if (cells_.size() != header_cells_) {
      return fail(reader_->at_line(line) + ": " + std::to_string(cells_.size()) +
                  " cells, but the header has " + std::to_string(header_cells_) +
                  text::CsvReader::delimiter_note(cells_));
    }
    row = RecordingRow{};
    row.line = line;
    auto cell = [&](std::size_t c) -> const std::string* {
      return index_[c] ? &cells_[*index_[c]] : nullptr;
    };
    // A number in column c, or nothing when the cell is empty; false on a bad cell.
    auto number = [&](std::size_t c, std::optional<double>& out) {
      const std::string* text = cell(c);
      if (text == nullptr || text->empty()) return true;
      std::string why;
      auto v = parse_number(*text, &why);
      if (!v) return fail(where(line, c) + ": " + why);
      out = *v * map_.to_si(recording_columns()[c]);
      return true;
    };
    std::optional<double> t, temperature, field, x, y, range, tc;
    if (const std::string* text = cell(time_s); text == nullptr || text->empty()) {
      return fail(where(line, time_s) + ": is empty (every row needs its time)");
    }
    if (!number(time_s, t) || !number(temperature_k, temperature) || !number(field_t, field) ||
        !number(lockin_x_v, x) || !number(lockin_y_v, y) || !number(lockin_range_v, range) ||
        !number(lockin_time_constant_s, tc)) {
      return false;
    }
    row.t_s = *t;
    const bool unix_time = row.t_s >= unix_time_threshold_s;
    if (!unix_times_) unix_times_ = unix_time;
    if (*unix_times_ != unix_time) {
      return fail(where(line, time_s) + ": " + format_number(row.t_s, 12) +
                  (unix_time ? " is a Unix time, but the recording began with relative times"
                             : " is a relative time, but the recording began with Unix times"));
    }
    if (previous_t_ && row.t_s < *previous_t_) {
      return fail(where(line, time_s) + ": time runs backward (" + format_number(row.t_s, 12) + " after " +
                  format_number(*previous_t_, 12) + ")");
    }
    previous_t_ = row.t_s;
    if (temperature) {
      if (auto r = protocol::limits::temperature_refusal(*temperature)) {
        return fail(limit_message(where(line, temperature_k), *r, "temperature_k", map_,
                                  *temperature / map_.to_si("temperature_k")));
      }
      row.temperature_k = temperature;
    }
    if (field) {
      if (auto r = protocol::limits::field_refusal(*field)) {
        return fail(limit_message(where(line, field_t), *r, "field_t", map_,
                                  *field / map_.to_si("field_t")));
      }
      row.field_t = field;
    }
    if (x.has_value() != y.has_value()) {
      return fail(where(line, x ? lockin_y_v : lockin_x_v) +
                  ": is empty while the other lock-in value is not (both or neither)");
    }
    if (x) {
      row.has_lockin = true;
      row.x_v = *x;
      row.y_v = *y;
      if (range) {
        if (!(*range > 0.0)) return fail(where(line, lockin_range_v) + ": must be > 0, got " + format_number(*range, 6));
        row.range_v = range;
      }
      if (tc) {
        if (!(*tc > 0.0)) {
          return fail(where(line, lockin_time_constant_s) + ": must be > 0, got " + format_number(*tc, 6));
        }
        row.time_constant_s = tc;
      }
      if (const std::string* text = cell(lockin_overload); text != nullptr && !text->empty()) {
        if (*text == "1" || *text == "true") {
          row.overload = true;
        } else if (*text == "0" || *text == "false") {
          row.overload = false;
        } else {
          return fail(where(line, lockin_overload) + ": " + text::quote_cell(*text) + " is not 0, 1, false or true");
        }
      }
    }
    return true;
  }
  return false;
}

Status scan_recording(std::istream& in, const std::string& source_name, const ColumnMap& map,
                         RecordingSummary& out) {
  out = RecordingSummary{};
  RecordingReader reader;
  if (auto s = reader.open(in, source_name, map); !s.ok()) return s;
  RecordingRow row;
  Status status;
  while (reader.next(row, status)) {
    if (out.rows == 0) {
      out.first_t_s = row.t_s;
      out.unix_times = row.t_s >= unix_time_threshold_s;
    }
    out.last_t_s = row.t_s;
    ++out.rows;
    out.lockin_readings += row.has_lockin ? 1 : 0;
    out.thermometer_readings += row.temperature_k ? 1 : 0;
    out.field_readings += row.field_t ? 1 : 0;
  }
  if (!status.ok()) return status;
  if (out.rows == 0) return Status::invalid_input(source_name + ": no data rows after the header");
  return Status::success();
}

}  // namespace lphi::client
