// A small, strict reader for the comma-separated tables lphi reads: sweeps
// (field_t, rsq_ohm, ...), L_phi(T) tables and recorded readings.
//
// Format: the lexical rules of schema/text/csv_reader.hpp (header row of
// unique names, commas, RFC 4180 quotes, '#' comments, blank lines, CRLF,
// BOM), and in addition:
//   - every data row has exactly as many cells as the header;
//   - columns are looked up by name; columns nobody asks for are ignored.
//
// Numbers are parsed strictly by text::parse_number: the whole cell must be a
// finite decimal number ("1.5x", "", "nan", "inf" are errors). Every error
// message names the file's line number (1-based, counting every line, so it
// matches what an editor shows) and the column.
//
// Errors are values (Status); nothing here throws for bad input.
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "schema/status.hpp"
#include "schema/text/text.hpp"

namespace lphi::client {

// Parses one cell as a finite double (schema/text/text.hpp).
using text::parse_number;

class CsvTable {
 public:
  // Parses the whole text. source_name (a file name, or "stdin") prefixes
  // every error message.
  static Status parse(std::string_view text, std::string_view source_name,
                         CsvTable& out);

  const std::vector<std::string>& header() const { return header_; }
  const std::string& source_name() const { return source_name_; }
  std::size_t row_count() const { return rows_.size(); }

  std::optional<std::size_t> column_index(std::string_view name) const;
  bool has_column(std::string_view name) const { return column_index(name).has_value(); }

  // The file line (1-based) that data row `row` (0-based) came from.
  std::size_t line_number(std::size_t row) const { return rows_.at(row).line; }
  const std::string& cell(std::size_t row, std::size_t column) const {
    return rows_.at(row).cells.at(column);
  }

  // All values of a numeric column, in row order. Fails when the column is
  // missing or a cell is not a finite number.
  Status numeric_column(std::string_view name, std::vector<double>& out) const;

  // "<source> line <n>, column '<name>'": the prefix of a message about one cell.
  std::string where(std::size_t row, std::string_view column_name) const;

 private:
  struct Row {
    std::size_t line = 0;
    std::vector<std::string> cells;
  };
  std::string source_name_;
  std::vector<std::string> header_;
  std::vector<Row> rows_;
};

// Reads a whole file, or standard input when path is "-". Refuses files
// larger than max_bytes so that a wrong path (a device, a huge log) gives a
// clear error instead of exhausting memory.
Status read_text_input(const std::string& path, std::string& out,
                          std::size_t max_bytes = std::size_t{256} << 20);

// The name to use for path in messages ("stdin" for "-").
std::string input_display_name(const std::string& path);

}  // namespace lphi::client
