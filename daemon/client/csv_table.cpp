#include "daemon/client/csv_table.hpp"

#include <charconv>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <iterator>
#include <system_error>
#include <unordered_set>

namespace lphi::client {
namespace {

bool is_blank(char c) {
  return c == ' ' || c == '\t' || c == '\r' || c == '\v' || c == '\f';
}

std::string_view trim(std::string_view s) {
  while (!s.empty() && is_blank(s.front())) s.remove_prefix(1);
  while (!s.empty() && is_blank(s.back())) s.remove_suffix(1);
  return s;
}

// Splits on commas without quoting; every piece is trimmed.
std::vector<std::string> split_cells(std::string_view line) {
  std::vector<std::string> cells;
  for (;;) {
    const auto comma = line.find(',');
    cells.emplace_back(trim(line.substr(0, comma)));
    if (comma == std::string_view::npos) break;
    line.remove_prefix(comma + 1);
  }
  return cells;
}

// Shortens a cell for quoting in an error message: a runaway cell (a binary
// file read by mistake) must not flood the terminal.
std::string quoted(std::string_view cell) {
  constexpr std::size_t max_shown = 40;
  std::string shown(cell.substr(0, max_shown));
  if (cell.size() > max_shown) shown += "...";
  return "'" + shown + "'";
}

}  // namespace

std::optional<double> parse_number(std::string_view cell, std::string* why) {
  auto fail = [&](std::string reason) -> std::optional<double> {
    if (why != nullptr) *why = std::move(reason);
    return std::nullopt;
  };
  std::string_view text = trim(cell);
  if (text.empty()) return fail("is empty");
  // printf("%+g") writes a leading '+'; from_chars does not accept one.
  if (text.front() == '+') {
    text.remove_prefix(1);
    if (text.empty() || text.front() == '+' || text.front() == '-') {
      return fail(quoted(cell) + " is not a number");
    }
  }
  double value = 0.0;
  const char* first = text.data();
  const char* last = text.data() + text.size();
  const auto [ptr, ec] = std::from_chars(first, last, value, std::chars_format::general);
  if (ec == std::errc::result_out_of_range) {
    return fail(quoted(cell) + " is out of the range of a double");
  }
  if (ec != std::errc{} || ptr != last) return fail(quoted(cell) + " is not a number");
  if (!std::isfinite(value)) return fail(quoted(cell) + " is not a finite number");
  return value;
}

Status CsvTable::parse(std::string_view text, std::string_view source_name,
                          CsvTable& out) {
  out = CsvTable{};
  out.source_name_ = std::string(source_name);
  const std::string prefix = out.source_name_ + " ";

  constexpr std::string_view bom = "\xEF\xBB\xBF";
  if (text.substr(0, bom.size()) == bom) text.remove_prefix(bom.size());

  bool have_header = false;
  std::size_t line_no = 0;
  while (!text.empty()) {
    const auto newline = text.find('\n');
    std::string_view line = text.substr(0, newline);
    text.remove_prefix(newline == std::string_view::npos ? text.size() : newline + 1);
    ++line_no;

    const std::string_view content = trim(line);
    if (content.empty() || content.front() == '#') continue;

    std::vector<std::string> cells = split_cells(content);
    if (!have_header) {
      std::unordered_set<std::string> seen;
      for (std::size_t i = 0; i < cells.size(); ++i) {
        if (cells[i].empty()) {
          return Status::invalid_input(prefix + "line " + std::to_string(line_no) +
                                    ": header column " + std::to_string(i + 1) +
                                    " has no name");
        }
        if (!seen.insert(cells[i]).second) {
          return Status::invalid_input(prefix + "line " + std::to_string(line_no) +
                                    ": header names column '" + cells[i] + "' twice");
        }
      }
      out.header_ = std::move(cells);
      have_header = true;
      continue;
    }
    if (cells.size() != out.header_.size()) {
      return Status::invalid_input(prefix + "line " + std::to_string(line_no) + ": row has " +
                                std::to_string(cells.size()) +
                                (cells.size() == 1 ? " cell" : " cells") + ", the header has " +
                                std::to_string(out.header_.size()) + " columns");
    }
    out.rows_.push_back(Row{line_no, std::move(cells)});
  }
  if (!have_header) {
    return Status::invalid_input(out.source_name_ +
                              ": no header row (the file is empty or holds only comments)");
  }
  return Status::success();
}

std::optional<std::size_t> CsvTable::column_index(std::string_view name) const {
  for (std::size_t i = 0; i < header_.size(); ++i) {
    if (header_[i] == name) return i;
  }
  return std::nullopt;
}

std::string CsvTable::where(std::size_t row, std::string_view column_name) const {
  return source_name_ + " line " + std::to_string(line_number(row)) + ", column '" +
         std::string(column_name) + "'";
}

Status CsvTable::numeric_column(std::string_view name, std::vector<double>& out) const {
  out.clear();
  const auto index = column_index(name);
  if (!index) {
    std::string have;
    for (const auto& h : header_) have += (have.empty() ? "" : ", ") + h;
    return Status::invalid_input(source_name_ + ": missing column '" + std::string(name) +
                              "' (the header has: " + have + ")");
  }
  out.reserve(rows_.size());
  for (std::size_t r = 0; r < rows_.size(); ++r) {
    std::string why;
    const auto value = parse_number(rows_[r].cells[*index], &why);
    if (!value) return Status::invalid_input(where(r, name) + ": " + why);
    out.push_back(*value);
  }
  return Status::success();
}

std::string input_display_name(const std::string& path) {
  return path == "-" ? std::string("stdin") : path;
}

Status read_text_input(const std::string& path, std::string& out, std::size_t max_bytes) {
  out.clear();
  std::ifstream file;
  std::istream* in = &std::cin;
  if (path != "-") {
    std::error_code dir_ec;
    if (std::filesystem::is_directory(path, dir_ec)) {
      return Status::invalid_input(path + ": is a directory, not a table");
    }
    file.open(path, std::ios::binary);
    if (!file) {
      const std::error_code ec(errno, std::generic_category());
      return Status::invalid_input(path + ": cannot open: " + ec.message());
    }
    in = &file;
  }
  char buffer[1 << 16];
  while (*in) {
    in->read(buffer, sizeof buffer);
    const auto got = static_cast<std::size_t>(in->gcount());
    if (out.size() + got > max_bytes) {
      const std::string limit = max_bytes >= (std::size_t{1} << 20)
                                    ? std::to_string(max_bytes >> 20) + " MiB"
                                    : std::to_string(max_bytes) + " bytes";
      return Status::invalid_input(input_display_name(path) + ": larger than " + limit +
                                "; not a table lphi reads");
    }
    out.append(buffer, got);
  }
  if (in->bad()) {
    return Status::invalid_input(input_display_name(path) + ": read error");
  }
  return Status::success();
}

}  // namespace lphi::client
