// Reading back a recording written by `lphi-sim --record` (the CSV of
// drivers/sim/record_file.hpp) for the scenario tests: every cell as a
// number, an empty cell as "absent".
#pragma once

#include <fstream>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

namespace lphi::testing {

struct CsvRow {
  double t_s = 0.0;
  std::optional<double> temperature_k;
  double field_t = 0.0;
  std::optional<double> x_v, y_v, overload;
};

struct Recording {
  std::string header;
  std::vector<CsvRow> rows;
  std::string error;  // empty when the file read cleanly
};

inline std::optional<double> cell(const std::string& text) {
  if (text.empty()) return std::nullopt;
  std::size_t used = 0;
  const double v = std::stod(text, &used);
  if (used != text.size()) throw std::invalid_argument(text);
  return v;
}

inline Recording read_recording(const std::string& path) {
  Recording r;
  std::ifstream in(path);
  if (!in) {
    r.error = "cannot read " + path;
    return r;
  }
  std::getline(in, r.header);
  std::string line;
  std::size_t n = 1;
  while (std::getline(in, line)) {
    ++n;
    std::vector<std::string> cells;
    std::stringstream s(line);
    std::string c;
    while (std::getline(s, c, ',')) cells.push_back(c);
    if (!line.empty() && line.back() == ',') cells.emplace_back();
    if (cells.size() != 6) {
      r.error = "line " + std::to_string(n) + ": " + std::to_string(cells.size()) + " cells";
      return r;
    }
    try {
      CsvRow row;
      row.t_s = cell(cells[0]).value();
      row.temperature_k = cell(cells[1]);
      row.field_t = cell(cells[2]).value();
      row.x_v = cell(cells[3]);
      row.y_v = cell(cells[4]);
      row.overload = cell(cells[5]);
      r.rows.push_back(row);
    } catch (const std::exception&) {
      r.error = "line " + std::to_string(n) + ": not a number: " + line;
      return r;
    }
  }
  return r;
}

inline std::string slurp_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

}  // namespace lphi::testing
