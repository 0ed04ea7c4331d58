// Unit tests of lphi's CSV reader (daemon/client/csv_table.hpp).
//
// Expected numbers come from the C++ standard's requirement that
// std::from_chars round correctly (the same IEEE 754 round-to-nearest the
// compiler applies to the literal on the right-hand side), so exact equality
// is the right tolerance. Line numbers are those of the text as an editor
// shows them (counted by hand in each test).

#include <cmath>
#include <filesystem>
#include <string>
#include <vector>

#include <gmock/gmock.h>
#include <gtest/gtest.h>

#include "daemon/client/csv_table.hpp"
#include "tests/support/run_program.hpp"

namespace lphi::client {
namespace {

using ::testing::HasSubstr;

CsvTable parse_ok(std::string_view text) {
  CsvTable table;
  const Status s = CsvTable::parse(text, "t.csv", table);
  EXPECT_TRUE(s.ok()) << s.message();
  return table;
}

std::string parse_error(std::string_view text) {
  CsvTable table;
  const Status s = CsvTable::parse(text, "t.csv", table);
  EXPECT_FALSE(s.ok());
  return s.message();
}

std::string column_error(std::string_view text, std::string_view column) {
  const CsvTable table = parse_ok(text);
  std::vector<double> values;
  const Status s = table.numeric_column(column, values);
  EXPECT_FALSE(s.ok());
  return s.message();
}

TEST(CsvTable, ReadsHeaderAndRowsByName) {
  const CsvTable t = parse_ok("field_t,rsq_ohm\n-0.01,1000.5\n0,1000\n0.01,1000.5\n");
  ASSERT_EQ(t.header().size(), 2u);
  ASSERT_EQ(t.row_count(), 3u);
  std::vector<double> b, r;
  ASSERT_TRUE(t.numeric_column("field_t", b).ok());
  ASSERT_TRUE(t.numeric_column("rsq_ohm", r).ok());
  EXPECT_EQ(b, (std::vector<double>{-0.01, 0.0, 0.01}));
  EXPECT_EQ(r, (std::vector<double>{1000.5, 1000.0, 1000.5}));
  // Data row 0 is the file's line 2 (line 1 is the header).
  EXPECT_EQ(t.line_number(0), 2u);
  EXPECT_EQ(t.line_number(2), 4u);
}

TEST(CsvTable, ColumnOrderDoesNotMatterAndExtraColumnsAreIgnored) {
  const CsvTable t = parse_ok("note,rsq_ohm,field_t\nwarm,1,2\ncold,3,4\n");
  std::vector<double> b;
  ASSERT_TRUE(t.numeric_column("field_t", b).ok());
  EXPECT_EQ(b, (std::vector<double>{2.0, 4.0}));
  EXPECT_EQ(t.column_index("rsq_ohm"), 1u);
  EXPECT_FALSE(t.column_index("lockin_x_v").has_value());
}

TEST(CsvTable, TrimsWhitespaceToleratesCrlfSkipsBlankAndCommentLines) {
  // line 1 BOM + comment, 2 blank, 3 header, 4 comment, 5 row, 6 blank (spaces), 7 row
  const std::string text =
      "\xEF\xBB\xBF# exported by a lab script\r\n"
      "\r\n"
      "  field_t , rsq_ohm \r\n"
      "   # a comment after leading blanks\r\n"
      " 1.5 ,\t2.5\r\n"
      "   \r\n"
      "-3e-3,4\r\n";
  const CsvTable t = parse_ok(text);
  ASSERT_EQ(t.header(), (std::vector<std::string>{"field_t", "rsq_ohm"}));
  ASSERT_EQ(t.row_count(), 2u);
  EXPECT_EQ(t.line_number(0), 5u);
  EXPECT_EQ(t.line_number(1), 7u);
  std::vector<double> b, r;
  ASSERT_TRUE(t.numeric_column("field_t", b).ok());
  ASSERT_TRUE(t.numeric_column("rsq_ohm", r).ok());
  EXPECT_EQ(b, (std::vector<double>{1.5, -3e-3}));
  EXPECT_EQ(r, (std::vector<double>{2.5, 4.0}));
}

TEST(CsvTable, LastLineWithoutNewlineIsARow) {
  const CsvTable t = parse_ok("a\n1\n2");
  EXPECT_EQ(t.row_count(), 2u);
}

TEST(CsvTable, HeaderOnlyGivesZeroRows) {
  const CsvTable t = parse_ok("field_t,rsq_ohm\n");
  EXPECT_EQ(t.row_count(), 0u);
}

TEST(CsvTable, WrongCellCountNamesTheLine) {
  const std::string e = parse_error("a,b\n1,2\n# note\n3\n");
  EXPECT_THAT(e, HasSubstr("t.csv line 4"));
  EXPECT_THAT(e, HasSubstr("row has 1 cell, the header has 2 columns"));
  const std::string e2 = parse_error("a,b\n1,2,3\n");
  EXPECT_THAT(e2, HasSubstr("line 2"));
  EXPECT_THAT(e2, HasSubstr("3 cells"));
}

TEST(CsvTable, HeaderProblems) {
  EXPECT_THAT(parse_error(""), HasSubstr("no header row"));
  EXPECT_THAT(parse_error("# only a comment\n\n"), HasSubstr("no header row"));
  EXPECT_THAT(parse_error("a,,b\n"), HasSubstr("header column 2 has no name"));
  EXPECT_THAT(parse_error("\na,b,a\n"), HasSubstr("line 2: header names column 'a' twice"));
}

TEST(CsvTable, MissingColumnIsNamedWithTheHeader) {
  const std::string e = column_error("field_t,r_ohm\n1,2\n", "rsq_ohm");
  EXPECT_THAT(e, HasSubstr("missing column 'rsq_ohm'"));
  EXPECT_THAT(e, HasSubstr("field_t, r_ohm"));
}

TEST(CsvTable, NonNumericCellNamesLineAndColumn) {
  const std::string text = "field_t,rsq_ohm\n0.1,1\n0.2,1.5x\n";
  const std::string e = column_error(text, "rsq_ohm");
  EXPECT_THAT(e, HasSubstr("t.csv line 3, column 'rsq_ohm'"));
  EXPECT_THAT(e, HasSubstr("'1.5x' is not a number"));
  // The other column of the same table is fine.
  std::vector<double> b;
  EXPECT_TRUE(parse_ok(text).numeric_column("field_t", b).ok());
}

TEST(CsvTable, EmptyNanAndInfCellsAreErrors) {
  EXPECT_THAT(column_error("x,y\n1,\n", "y"), HasSubstr("line 2, column 'y': is empty"));
  const std::string nan_error = column_error("x,y\n1,2\n\n1,nan\n", "y");
  EXPECT_THAT(nan_error, HasSubstr("line 4, column 'y'"));
  EXPECT_THAT(nan_error, HasSubstr("'nan' is not a finite number"));
  EXPECT_THAT(column_error("x\ninf\n", "x"), HasSubstr("'inf' is not a finite number"));
  EXPECT_THAT(column_error("x\n-Infinity\n", "x"), HasSubstr("not a finite number"));
  EXPECT_THAT(column_error("x\n1e400\n", "x"), HasSubstr("'1e400' is out of the range"));
}

TEST(ParseNumber, StrictDecimal) {
  std::string why;
  EXPECT_EQ(parse_number("1e-3", &why), 1e-3);
  EXPECT_EQ(parse_number("-0.25", &why), -0.25);
  EXPECT_EQ(parse_number(" 42 ", &why), 42.0);
  EXPECT_EQ(parse_number("+1.5", &why), 1.5);  // printf("%+g") style
  // 0.1 is not exact in binary: from_chars must round like the compiler does.
  EXPECT_EQ(parse_number("0.1", &why), 0.1);
  EXPECT_EQ(parse_number("6.62607015e-34", &why), 6.62607015e-34);

  for (const char* bad : {"1.5x", "x1", "--1", "+-1", "+", "0x10", "1,5", "1 5", "", " "}) {
    EXPECT_FALSE(parse_number(bad, &why).has_value()) << bad;
    EXPECT_FALSE(why.empty()) << bad;
  }
}

TEST(ParseNumber, LongCellIsShortenedInTheMessage) {
  std::string why;
  const std::string runaway(500, 'z');
  EXPECT_FALSE(parse_number(runaway, &why).has_value());
  EXPECT_LT(why.size(), 80u);
  EXPECT_THAT(why, HasSubstr("..."));
}

TEST(ReadTextInput, MissingFileAndDirectoryAreNamed) {
  lphi::testing::TempDir dir;
  std::string text;
  const std::string missing = dir.file("no-such.csv");
  const Status s = read_text_input(missing, text);
  EXPECT_FALSE(s.ok());
  EXPECT_THAT(s.message(), HasSubstr(missing));
  EXPECT_THAT(s.message(), HasSubstr("No such file"));

  const Status d = read_text_input(dir.path(), text);
  EXPECT_FALSE(d.ok());
  EXPECT_THAT(d.message(), HasSubstr("is a directory"));
}

TEST(ReadTextInput, ReadsFileAndRefusesOversizedInput) {
  lphi::testing::TempDir dir;
  const std::string file = dir.write("t.csv", "a,b\n1,2\n");
  std::string text;
  ASSERT_TRUE(read_text_input(file, text).ok());
  EXPECT_EQ(text, "a,b\n1,2\n");
  const Status big = read_text_input(file, text, 4);
  EXPECT_FALSE(big.ok());
  EXPECT_THAT(big.message(), HasSubstr("larger than"));
}

}  // namespace
}  // namespace lphi::client
