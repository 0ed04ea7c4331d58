#include "daemon/client/recording_csv.hpp"

#include <algorithm>
#include <cmath>
#include <set>

#include "daemon/client/format.hpp"

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

bool is_blank(char c) { return c == ' ' || c == '\t' || c == '\r' || c == '\v' || c == '\f'; }

std::string trim(const std::string& s) {
  std::size_t a = 0, b = s.size();
  while (a < b && is_blank(s[a])) ++a;
  while (b > a && is_blank(s[b - 1])) --b;
  return s.substr(a, b - a);
}

void split_cells(const std::string& line, std::vector<std::string>& cells) {
  cells.clear();
  std::size_t from = 0;
  for (;;) {
    const auto comma = line.find(',', from);
    cells.push_back(trim(line.substr(from, comma == std::string::npos ? std::string::npos : comma - from)));
    if (comma == std::string::npos) break;
    from = comma + 1;
  }
}

bool skipped(const std::string& line) {
  const auto first = line.find_first_not_of(" \t\r\v\f");
  return first == std::string::npos || line[first] == '#';
}

std::string quoted(const std::string& cell) {
  constexpr std::size_t max_shown = 40;
  std::string text(1, '\'');
  text.append(cell, 0, std::min(cell.size(), max_shown));
  if (cell.size() > max_shown) text.append("...");
  text.push_back('\'');
  return text;
}

}  // namespace

const std::vector<std::string>& recording_columns() {
  static const std::vector<std::string> names = {
      "time_s",          "temperature_k",  "field_t",       "lockin_x_v", "lockin_y_v",
      "lockin_overload", "lockin_range_v", "lockin_time_constant_s"};
  return names;
}

Status add_column_mapping(const std::string& mapping, ColumnMap& map) {
  const auto eq = mapping.find('=');
  if (eq == std::string::npos || eq == 0 || eq + 1 == mapping.size()) {
    return Status::invalid_input("--column '" + mapping + "': expected COLUMN=NAME, e.g. time_s=t_sec");
  }
  const std::string canonical = trim(mapping.substr(0, eq));
  const std::string name = trim(mapping.substr(eq + 1));
  bool known = false;
  for (const auto& c : recording_columns()) known = known || c == canonical;
  if (!known) {
    std::string list;
    for (const auto& c : recording_columns()) list += (list.empty() ? "" : ", ") + c;
    return Status::invalid_input("--column '" + mapping + "': '" + canonical + "' is not a column of a recording (" +
                              list + ")");
  }
  if (name.empty()) return Status::invalid_input("--column '" + mapping + "': the file's column name is empty");
  if (map.count(canonical) != 0) {
    return Status::invalid_input("--column '" + mapping + "': '" + canonical + "' is mapped twice");
  }
  map[canonical] = name;
  return Status::success();
}

Status RecordingReader::open(std::istream& in, std::string source_name, const ColumnMap& map) {
  *this = RecordingReader{};
  in_ = &in;
  source_name_ = std::move(source_name);
  std::string line;
  while (std::getline(in, line)) {
    ++line_;
    if (line_ == 1 && line.rfind("\xEF\xBB\xBF", 0) == 0) line.erase(0, 3);
    if (skipped(line)) continue;
    std::vector<std::string> header;
    split_cells(line, header);
    std::set<std::string> seen;
    for (std::size_t i = 0; i < header.size(); ++i) {
      if (header[i].empty()) {
        return Status::invalid_input(source_name_ + " line " + std::to_string(line_) + ": header cell " +
                                  std::to_string(i + 1) + " is empty");
      }
      if (!seen.insert(header[i]).second) {
        return Status::invalid_input(source_name_ + " line " + std::to_string(line_) + ": column '" + header[i] +
                                  "' appears twice in the header");
      }
    }
    header_cells_ = header.size();
    index_.assign(column_count, std::nullopt);
    file_names_.assign(column_count, {});
    const auto& names = recording_columns();
    for (std::size_t c = 0; c < column_count; ++c) {
      const auto mapped = map.find(names[c]);
      file_names_[c] = mapped != map.end() ? mapped->second : names[c];
      for (std::size_t i = 0; i < header.size(); ++i) {
        if (header[i] == file_names_[c]) index_[c] = i;
      }
      if (!index_[c] && c < recording_required_columns) {
        std::string message = source_name_ + " line " + std::to_string(line_) + ": no column '" + file_names_[c] + "'";
        if (mapped != map.end()) message += " (given for " + names[c] + " by --column)";
        message += "; a recording needs time_s, temperature_k, field_t, lockin_x_v, lockin_y_v"
                   " (map other names with --column " + names[c] + "=NAME)";
        return Status::invalid_input(message);
      }
    }
    return Status::success();
  }
  if (in.bad()) return Status::invalid_input(source_name_ + ": read error");
  return Status::invalid_input(source_name_ + ": no header line (the file is empty)");
}

std::string RecordingReader::where(std::size_t line, std::size_t canonical) const {
  std::string text = source_name_ + " line " + std::to_string(line) + ", column '" + file_names_[canonical] + "'";
  if (file_names_[canonical] != recording_columns()[canonical]) text += " (" + recording_columns()[canonical] + ")";
  return text;
}

bool RecordingReader::next(RecordingRow& row, Status& status) {
  status = Status::success();
  if (in_ == nullptr) {
    status = Status::invalid_input("recording not opened");
    return false;
  }
  std::string line;
  while (std::getline(*in_, line)) {
    ++line_;
    if (skipped(line)) continue;
    split_cells(line, cells_);
    auto fail = [&](std::string message) {
      status = Status::invalid_input(std::move(message));
      return false;
    };
    if (cells_.size() != header_cells_) {
      return fail(source_name_ + " line " + std::to_string(line_) + ": " + std::to_string(cells_.size()) +
                  " cells, but the header has " + std::to_string(header_cells_));
    }
    row = RecordingRow{};
    row.line = line_;
    auto cell = [&](std::size_t c) -> const std::string* {
      return index_[c] ? &cells_[*index_[c]] : nullptr;
    };
    // A number in column c, or nothing when the cell is empty; false on a bad cell.
    auto number = [&](std::size_t c, std::optional<double>& out) {
      const std::string* text = cell(c);
      if (text == nullptr || text->empty()) return true;
      std::string why;
      auto v = parse_number(*text, &why);
      if (!v) return fail(where(line_, c) + ": " + why);
      out = v;
      return true;
    };
    std::optional<double> t, temperature, field, x, y, range, tc;
    if (const std::string* text = cell(time_s); text == nullptr || text->empty()) {
      return fail(where(line_, time_s) + ": is empty (every row needs its time)");
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
      return fail(where(line_, time_s) + ": " + format_number(row.t_s, 12) +
                  (unix_time ? " is a Unix time, but the recording began with relative times"
                             : " is a relative time, but the recording began with Unix times"));
    }
    if (previous_t_ && row.t_s < *previous_t_) {
      return fail(where(line_, time_s) + ": time runs backward (" + format_number(row.t_s, 12) + " after " +
                  format_number(*previous_t_, 12) + ")");
    }
    previous_t_ = row.t_s;
    if (temperature) {
      if (!(*temperature > 0.0 && *temperature < 1000.0)) {
        return fail(where(line_, temperature_k) + ": " + format_number(*temperature, 6) +
                    " K is outside (0, 1000) K");
      }
      row.temperature_k = temperature;
    }
    if (field) {
      if (!(std::fabs(*field) < 50.0)) {
        return fail(where(line_, field_t) + ": " + format_number(*field, 6) + " T is not below 50 T in magnitude");
      }
      row.field_t = field;
    }
    if (x.has_value() != y.has_value()) {
      return fail(where(line_, x ? lockin_y_v : lockin_x_v) +
                  ": is empty while the other lock-in value is not (both or neither)");
    }
    if (x) {
      row.has_lockin = true;
      row.x_v = *x;
      row.y_v = *y;
      if (range) {
        if (!(*range > 0.0)) return fail(where(line_, lockin_range_v) + ": must be > 0, got " + format_number(*range, 6));
        row.range_v = range;
      }
      if (tc) {
        if (!(*tc > 0.0)) {
          return fail(where(line_, lockin_time_constant_s) + ": must be > 0, got " + format_number(*tc, 6));
        }
        row.time_constant_s = tc;
      }
      if (const std::string* text = cell(lockin_overload); text != nullptr && !text->empty()) {
        if (*text == "1" || *text == "true") {
          row.overload = true;
        } else if (*text == "0" || *text == "false") {
          row.overload = false;
        } else {
          return fail(where(line_, lockin_overload) + ": " + quoted(*text) + " is not 0, 1, false or true");
        }
      }
    }
    return true;
  }
  if (in_->bad()) status = Status::invalid_input(source_name_ + ": read error after line " + std::to_string(line_));
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
