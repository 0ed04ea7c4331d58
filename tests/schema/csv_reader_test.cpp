// schema/text/csv_reader.hpp: the one streaming CSV reader. Quoting follows
// RFC 4180 section 2 (rules 5-7: a quoted cell may hold commas, a quote inside
// it is doubled); every error must name the source, the line and, for a
// lexical error, the column (1-based byte, as an editor counts).
#include <gmock/gmock.h>
#include <gtest/gtest.h>

#include <sstream>
#include <string>
#include <vector>

#include "schema/text/csv_reader.hpp"

namespace lphi::text {
namespace {

using ::testing::ElementsAre;
using ::testing::HasSubstr;

struct Read {
  std::vector<std::vector<std::string>> records;
  std::vector<std::size_t> lines;
  std::string error;
};

Read read_all(const std::string& text, std::size_t max_line_bytes = CsvReader::default_max_line_bytes) {
  std::istringstream in(text);
  CsvReader reader(in, "t.csv", max_line_bytes);
  Read out;
  std::vector<std::string> cells;
  Status status;
  while (reader.next(cells, status)) {
    out.records.push_back(cells);
    out.lines.push_back(reader.line());
  }
  out.error = status.message();
  return out;
}

TEST(CsvReader, SplitsTrimsAndSkipsBlankAndCommentLines) {
  const Read r = read_all("\xEF\xBB\xBF" "a, b ,c\r\n\n  # a comment\n1,,3\n \t\n4,5,6");
  EXPECT_EQ(r.error, "");
  ASSERT_EQ(r.records.size(), 3u);
  EXPECT_THAT(r.records[0], ElementsAre("a", "b", "c"));
  EXPECT_THAT(r.records[1], ElementsAre("1", "", "3"));
  EXPECT_THAT(r.records[2], ElementsAre("4", "5", "6"));  // no final line end
  EXPECT_THAT(r.lines, ElementsAre(1u, 4u, 6u));
}

TEST(CsvReader, QuotedCellsFollowRfc4180) {
  const Read r = read_all("name,note\n\"lockin, A\",\"say \"\"hi\"\"\"\n  \"  kept  \"  ,\"\"\n");
  EXPECT_EQ(r.error, "");
  ASSERT_EQ(r.records.size(), 3u);
  EXPECT_THAT(r.records[1], ElementsAre("lockin, A", "say \"hi\""));
  // Blanks inside quotes are content; blanks around them are not.
  EXPECT_THAT(r.records[2], ElementsAre("  kept  ", ""));
}

TEST(CsvReader, LexicalErrorsNameLineAndColumn) {
  EXPECT_EQ(read_all("a,b\n1,\"open\n").error,
            "t.csv line 2, column 3: the quoted cell is not closed on its line");
  EXPECT_EQ(read_all("a,b\n\"x\"y,2\n").error,
            "t.csv line 2, column 4: text after a closing quote (a quoted cell ends at its quote)");
  EXPECT_THAT(read_all("a,b\n\n1,x\"y\n").error,
              HasSubstr("t.csv line 3, column 4: a quote inside an unquoted cell"));
}

TEST(CsvReader, StopsAtTheFirstError) {
  std::istringstream in("a\n\"\n1\n");
  CsvReader reader(in, "t.csv");
  std::vector<std::string> cells;
  Status status;
  ASSERT_TRUE(reader.next(cells, status));
  EXPECT_FALSE(reader.next(cells, status));
  EXPECT_FALSE(status.ok());
  EXPECT_FALSE(reader.next(cells, status));  // not resumed past the bad line
  EXPECT_TRUE(status.ok());
}

TEST(CsvReader, ALineBeyondTheBoundIsRefusedNotKept) {
  const Read r = read_all("a\n" + std::string(16, 'x') + "\n" + std::string(17, 'y') + "\n", 16);
  ASSERT_EQ(r.records.size(), 2u);
  EXPECT_EQ(r.records[1][0], std::string(16, 'x'));  // exactly the bound is a line
  EXPECT_EQ(r.error, "t.csv line 3: longer than 16 bytes; not a line of a table lphi reads");
}

TEST(CsvReader, HeaderNamesEveryColumnOnce) {
  auto header_error = [](const std::string& text) {
    std::istringstream in(text);
    CsvReader reader(in, "h.csv");
    std::vector<std::string> header;
    return reader.read_header(header).message();
  };
  EXPECT_EQ(header_error("# comment\nx,y\n"), "");
  EXPECT_THAT(header_error(""), HasSubstr("h.csv: no header row"));
  EXPECT_THAT(header_error("# only\n\n"), HasSubstr("no header row"));
  EXPECT_EQ(header_error("a,,b\n"), "h.csv line 1: header column 2 has no name");
  EXPECT_EQ(header_error("\na,b,a\n"),
            "h.csv line 2: header names column 'a' twice ('a' appears twice, as columns 1 and 3)");
  EXPECT_THAT(header_error("\"a,b\",\"a,b\"\n"), HasSubstr("column 'a,b' twice"));
}

// A table in another dialect (a spreadsheet's semicolon export, a
// tab-separated log) is named by the delimiter found in its header line and
// the one lphi expects; a one-column header without one is still a header.
TEST(CsvReader, AHeaderSplitByAnotherDelimiterIsNamed) {
  auto header_error = [](const std::string& text) {
    std::istringstream in(text);
    CsvReader reader(in, "h.csv");
    std::vector<std::string> header;
    return reader.read_header(header).message();
  };
  EXPECT_EQ(header_error("field_t;rsq_ohm\n0,1;1000,5\n"),
            "h.csv line 1 looks ';'-separated ('field_t', 'rsq_ohm'); lphi reads comma-separated "
            "files: save the table with ',' between cells and '.' as the decimal point");
  EXPECT_THAT(header_error("# exported\nfield_t\trsq_ohm\tr_ohm\n"),
              HasSubstr("h.csv line 2 looks tab-separated ('field_t', 'rsq_ohm', 'r_ohm')"));
  EXPECT_THAT(header_error("a|b|c|d|e|f\n"),
              HasSubstr("line 1 looks '|'-separated ('a', 'b', 'c', 'd', ...)"));
  // The most frequent foreign delimiter wins: three tabs against one ';'.
  EXPECT_THAT(header_error("a;x\tb\tc\td\n"), HasSubstr("looks tab-separated"));
  EXPECT_EQ(header_error("time_s\n"), "");
  EXPECT_EQ(foreign_delimiter("a,b,c"), '\0');
  EXPECT_EQ(CsvReader::delimiter_note({"1;2;3"}),
            " (the line looks ';'-separated; lphi reads comma-separated files)");
  EXPECT_EQ(CsvReader::delimiter_note({"1", "2"}), "");
  EXPECT_EQ(CsvReader::delimiter_note({"12"}), "");
}

}  // namespace
}  // namespace lphi::text
