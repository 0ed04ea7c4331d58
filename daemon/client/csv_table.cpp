#include "daemon/client/csv_table.hpp"

#include <filesystem>
#include <fstream>
#include <iostream>
#include <sstream>
#include <system_error>

#include "schema/text/csv_reader.hpp"

namespace lphi::client {

Status CsvTable::parse(std::string_view text, std::string_view source_name,
                          CsvTable& out) {
  out = CsvTable{};
  out.source_name_ = std::string(source_name);
  std::istringstream in{std::string(text)};
  text::CsvReader reader(in, out.source_name_);
  if (auto s = reader.read_header(out.header_); !s.ok()) return s;
  std::vector<std::string> cells;
  Status status;
  while (reader.next(cells, status)) {
    if (cells.size() != out.header_.size()) {
      return Status::invalid_input(reader.at_line(reader.line()) + ": row has " +
                                std::to_string(cells.size()) +
                                (cells.size() == 1 ? " cell" : " cells") + ", the header has " +
                                std::to_string(out.header_.size()) + " columns" +
                                text::CsvReader::delimiter_note(cells));
    }
    out.rows_.push_back(Row{reader.line(), std::move(cells)});
  }
  return status;
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
