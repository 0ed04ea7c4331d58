#include "schema/text/csv_reader.hpp"

#include <algorithm>
#include <streambuf>
#include <string_view>
#include <unordered_map>

#include "schema/text/text.hpp"

namespace lphi::text {

char foreign_delimiter(std::string_view line) {
  char best = '\0';
  std::size_t best_count = 0;
  for (char d : {';', '\t', '|'}) {
    std::size_t n = 0;
    for (char c : line) n += c == d ? 1 : 0;
    if (n > best_count) {
      best = d;
      best_count = n;
    }
  }
  return best;
}

std::string delimiter_name(char delimiter) {
  if (delimiter == '\t') return "tab";
  return std::string("'") + delimiter + "'";
}

std::string CsvReader::delimiter_note(const std::vector<std::string>& cells) {
  if (cells.size() != 1) return {};
  const char d = foreign_delimiter(cells.front());
  if (d == '\0') return {};
  return " (the line looks " + delimiter_name(d) +
         "-separated; lphi reads comma-separated files)";
}

CsvReader::CsvReader(std::istream& in, std::string source_name, std::size_t max_line_bytes)
    : in_(&in), source_name_(std::move(source_name)), max_line_bytes_(max_line_bytes) {}

std::string CsvReader::at_line(std::size_t line) const {
  return source_name_ + " line " + std::to_string(line);
}

// One line without its end into `line`; false at the end of the input or on
// an error. A line longer than the bound is an error, not a truncation: a
// wrong file (a binary, a log without line ends) must not be read as data.
bool CsvReader::read_line(std::string& line, Status& status) {
  line.clear();
  std::streambuf* buf = in_->rdbuf();
  if (buf == nullptr || !in_->good()) return false;
  bool any = false;
  for (;;) {
    const auto c = buf->sbumpc();
    if (std::char_traits<char>::eq_int_type(c, std::char_traits<char>::eof())) {
      in_->setstate(std::ios::eofbit);
      if (!any) return false;
      break;
    }
    any = true;
    const char ch = std::char_traits<char>::to_char_type(c);
    if (ch == '\n') break;
    if (line.size() >= max_line_bytes_) {
      status = Status::invalid_input(at_line(line_ + 1) + ": longer than " +
                                     std::to_string(max_line_bytes_) +
                                     " bytes; not a line of a table lphi reads");
      return false;
    }
    line.push_back(ch);
  }
  ++line_;
  if (line_ == 1 && line.rfind("\xEF\xBB\xBF", 0) == 0) line.erase(0, 3);
  if (!line.empty() && line.back() == '\r') line.pop_back();
  return true;
}

Status CsvReader::split(std::string_view line, std::vector<std::string>& cells) const {
  cells.clear();
  auto fail = [&](std::size_t at, const std::string& what) {
    return Status::invalid_input(at_line(line_) + ", column " + std::to_string(at + 1) + ": " +
                                 what);
  };
  std::size_t i = 0;
  for (;;) {
    while (i < line.size() && is_blank(line[i]) ) ++i;
    std::string cell;
    if (i < line.size() && line[i] == '"') {
      const std::size_t open = i++;
      for (;;) {
        if (i >= line.size()) {
          return fail(open, "the quoted cell is not closed on its line");
        }
        if (line[i] == '"') {
          if (i + 1 < line.size() && line[i + 1] == '"') {
            cell.push_back('"');
            i += 2;
            continue;
          }
          ++i;
          break;
        }
        cell.push_back(line[i++]);
      }
      while (i < line.size() && is_blank(line[i])) ++i;
      if (i < line.size() && line[i] != ',') {
        return fail(i, "text after a closing quote (a quoted cell ends at its quote)");
      }
    } else {
      const std::size_t start = i;
      while (i < line.size() && line[i] != ',') {
        if (line[i] == '"') {
          return fail(i, "a quote inside an unquoted cell (quote the whole cell and double the quote)");
        }
        ++i;
      }
      cell = std::string(trim(line.substr(start, i - start)));
    }
    cells.push_back(std::move(cell));
    if (i >= line.size()) return Status::success();
    ++i;  // the comma
  }
}

bool CsvReader::next(std::vector<std::string>& cells, Status& status) {
  status = Status::success();
  if (failed_) return false;
  while (read_line(buffer_, status)) {
    const std::string_view content = trim(buffer_);
    if (content.empty() || content.front() == '#') continue;
    record_line_ = line_;
    status = split(buffer_, cells);
    if (!status.ok()) {
      failed_ = true;
      return false;
    }
    return true;
  }
  if (status.ok() && in_->bad()) {
    status = Status::invalid_input(source_name_ + ": read error after line " + std::to_string(line_));
  }
  failed_ = !status.ok();
  return false;
}

Status CsvReader::read_header(std::vector<std::string>& header) {
  Status status;
  if (!next(header, status)) {
    if (!status.ok()) return status;
    return Status::invalid_input(
        source_name_ + ": no header row (no header line: the file is empty or holds only comments)");
  }
  // A header of one name that another delimiter splits is a file in another
  // dialect (a spreadsheet's ';' export, a tab-separated log): say so here
  // rather than let the caller report a missing column.
  if (header.size() == 1) {
    if (const char d = foreign_delimiter(header.front()); d != '\0') {
      std::string names;
      std::size_t shown = 0, start = 0;
      const std::string& line = header.front();
      while (start <= line.size() && shown < 4) {
        const std::size_t end = std::min(line.find(d, start), line.size());
        names += (shown == 0 ? "" : ", ") + quote_cell(trim(std::string_view(line).substr(start, end - start)));
        ++shown;
        start = end + 1;
      }
      if (start <= line.size()) names += ", ...";
      return Status::invalid_input(
          at_line(record_line_) + " looks " + delimiter_name(d) + "-separated (" + names +
          "); lphi reads comma-separated files: save the table with ',' between cells and '.' "
          "as the decimal point");
    }
  }
  std::unordered_map<std::string, std::size_t> seen;
  for (std::size_t i = 0; i < header.size(); ++i) {
    if (header[i].empty()) {
      return Status::invalid_input(at_line(record_line_) + ": header column " + std::to_string(i + 1) +
                                   " has no name");
    }
    const auto [it, fresh] = seen.emplace(header[i], i);
    if (!fresh) {
      return Status::invalid_input(at_line(record_line_) + ": header names column '" + header[i] +
                                   "' twice ('" + header[i] + "' appears twice, as columns " +
                                   std::to_string(it->second + 1) + " and " + std::to_string(i + 1) +
                                   ")");
    }
  }
  return Status::success();
}

}  // namespace lphi::text
