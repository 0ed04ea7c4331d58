// CsvReader: the one reader of lphi's comma-separated files (sweeps and
// L_phi(T) tables for `lphi fit` and `lphi dephasing`, readings for
// `lphi send --format csv`, recorded cooldowns for `lphi replay`).
//
// What it promises:
//   - streaming: it reads one line at a time from an istream and holds at most
//     one line (max_line_bytes, 1 MiB by default), so a recording of any
//     length is read in bounded memory;
//   - lexical rules: records are lines (LF or CRLF); a leading UTF-8
//     byte-order mark is dropped; blank lines and lines whose first non-blank
//     character is '#' are skipped; cells are separated by commas and trimmed
//     of blanks; a cell may be quoted as in RFC 4180 ("a, b" is one cell, ""
//     inside quotes is one quote), which lphi needs only for names; a quoted
//     cell ends on its line (no line breaks inside a cell);
//   - errors are values (Status, invalid_input) that name the source, the
//     line (1-based, counting every line as an editor does) and, for a
//     lexical error, the column (1-based byte in the line);
//   - the header (read_header) names every column once and none is empty;
//   - a file separated by another delimiter is named as such: a header that
//     is one cell holding ';', a tab or '|' is refused with "line 1 looks
//     ';'-separated; lphi reads comma-separated files", and a data row of
//     one such cell under a wider header gets the same note (delimiter_note),
//     instead of a later "no column named ..." or a cell count.
//
// Thread safety: one reader belongs to one thread, like its istream.
#pragma once

#include <cstddef>
#include <istream>
#include <string>
#include <vector>

#include "schema/status.hpp"

namespace lphi::text {

// The delimiter other than the comma that splits `line` most often: ';',
// '\t' or '|', or '\0' when none occurs. What a header line in another
// spreadsheet export looks like.
char foreign_delimiter(std::string_view line);
// "';'", "tab", "'|'": a delimiter as a message names it.
std::string delimiter_name(char delimiter);

class CsvReader {
 public:
  static constexpr std::size_t default_max_line_bytes = std::size_t{1} << 20;

  // source_name (a file name, or "stdin") begins every message.
  CsvReader(std::istream& in, std::string source_name,
            std::size_t max_line_bytes = default_max_line_bytes);

  // The next record, split into cells. True with `cells` set; false at the
  // end of the input (status ok) or on an error (status says where and why;
  // the reader stops there).
  bool next(std::vector<std::string>& cells, Status& status);

  // The first record, checked as a header: every name non-empty and unique.
  // An input without any record is an error ("no header row").
  Status read_header(std::vector<std::string>& header);

  // For a record of `cells` that does not fit the header: " (the line looks
  // ';'-separated; lphi reads comma-separated files)" when it is one cell
  // split by another delimiter, else empty. Append it to the message.
  static std::string delimiter_note(const std::vector<std::string>& cells);

  // The line number of the record last returned (0 before the first).
  std::size_t line() const { return record_line_; }
  const std::string& source_name() const { return source_name_; }
  // "<source> line <n>": the start of a message about line n.
  std::string at_line(std::size_t line) const;

 private:
  bool read_line(std::string& line, Status& status);
  Status split(std::string_view line, std::vector<std::string>& cells) const;

  std::istream* in_;
  std::string source_name_;
  std::size_t max_line_bytes_;
  std::size_t line_ = 0;
  std::size_t record_line_ = 0;
  bool failed_ = false;
  std::string buffer_;
};

}  // namespace lphi::text
