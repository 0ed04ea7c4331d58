// The recorded-cooldown reader of `lphi replay` (daemon/client/recording_csv.hpp):
// the format its header documents, and the limits lphid puts on a reading
// (schema/protocol/limits.hpp: T in (0, 1000) K, |B| <= 30 T), checked before
// anything is sent. Expected values are the cells written in each test.
#include <gmock/gmock.h>
#include <gtest/gtest.h>

#include <sstream>

#include "daemon/client/recording_csv.hpp"

namespace {

using lphi::client::add_column_mapping;
using lphi::client::ColumnMap;
using lphi::Status;
using lphi::client::RecordingReader;
using lphi::client::RecordingRow;
using lphi::client::RecordingSummary;
using lphi::client::scan_recording;
using ::testing::HasSubstr;

const char* header = "time_s,temperature_k,field_t,lockin_x_v,lockin_y_v\n";

Status scan(const std::string& text, RecordingSummary& summary, const ColumnMap& map = {}) {
  std::istringstream in(text);
  return scan_recording(in, "rec.csv", map, summary);
}

std::string scan_error(const std::string& text, const ColumnMap& map = {}) {
  RecordingSummary summary;
  const auto s = scan(text, summary, map);
  return s.ok() ? std::string("(no error)") : s.message();
}

TEST(RecordingCsv, ReadsRowsWithEmptyCellsAsAbsentReadings) {
  const std::string text = std::string("# a comment before the header\n") +
                           "time_s,temperature_k,field_t,lockin_x_v,lockin_y_v,lockin_overload,"
                           "lockin_range_v,lockin_time_constant_s,extra\r\n"
                           "0,0.5,-0.1,1e-3,2e-5,0,0.01,0.1,ignored\n"
                           "\n"
                           "0.1,,-0.099,1.1e-3,-2e-5,1,,,x\n"
                           "0.2,0.5,,,,,,,\n";
  std::istringstream in(text);
  RecordingReader reader;
  ASSERT_TRUE(reader.open(in, "rec.csv", {}).ok());
  RecordingRow row;
  Status status;
  ASSERT_TRUE(reader.next(row, status));
  EXPECT_EQ(row.line, 3u);
  EXPECT_DOUBLE_EQ(row.t_s, 0.0);
  ASSERT_TRUE(row.temperature_k.has_value());
  EXPECT_DOUBLE_EQ(*row.temperature_k, 0.5);
  ASSERT_TRUE(row.field_t.has_value());
  EXPECT_DOUBLE_EQ(*row.field_t, -0.1);
  EXPECT_TRUE(row.has_lockin);
  EXPECT_DOUBLE_EQ(row.x_v, 1e-3);
  EXPECT_DOUBLE_EQ(row.y_v, 2e-5);
  EXPECT_EQ(row.overload, std::optional<bool>(false));
  EXPECT_EQ(row.range_v, std::optional<double>(0.01));
  EXPECT_EQ(row.time_constant_s, std::optional<double>(0.1));

  ASSERT_TRUE(reader.next(row, status));
  EXPECT_EQ(row.line, 5u);  // the blank line counts, as an editor shows it
  EXPECT_FALSE(row.temperature_k.has_value());
  EXPECT_TRUE(row.has_lockin);
  EXPECT_EQ(row.overload, std::optional<bool>(true));
  EXPECT_FALSE(row.range_v.has_value());

  ASSERT_TRUE(reader.next(row, status));
  EXPECT_FALSE(row.field_t.has_value());
  EXPECT_FALSE(row.has_lockin);
  EXPECT_FALSE(reader.next(row, status));
  EXPECT_TRUE(status.ok()) << status.message();
}

TEST(RecordingCsv, SummaryCountsReadingsAndTellsUnixFromRelativeTimes) {
  RecordingSummary s;
  ASSERT_TRUE(scan(std::string(header) + "10,0.5,0,1,0\n11,,0.01,1,0\n12,0.5,0.02,,\n", s).ok());
  EXPECT_EQ(s.rows, 3u);
  EXPECT_EQ(s.lockin_readings, 2u);
  EXPECT_EQ(s.thermometer_readings, 2u);
  EXPECT_EQ(s.field_readings, 3u);
  EXPECT_DOUBLE_EQ(s.first_t_s, 10.0);
  EXPECT_DOUBLE_EQ(s.last_t_s, 12.0);
  EXPECT_FALSE(s.unix_times);

  ASSERT_TRUE(scan(std::string(header) + "1700000000,0.5,0,1,0\n1700000000.1,0.5,0,1,0\n", s).ok());
  EXPECT_TRUE(s.unix_times);
}

TEST(RecordingCsv, ErrorsNameTheLineAndTheColumn) {
  const std::string h(header);
  EXPECT_THAT(scan_error(h + "0,0.5,0,1,0\n1,0.5,abc,1,0\n"),
              HasSubstr("rec.csv line 3, column 'field_t': 'abc' is not a number"));
  EXPECT_THAT(scan_error(h + "0,0.5,0,1,0\n,0.5,0,1,0\n"), HasSubstr("line 3, column 'time_s': is empty"));
  EXPECT_THAT(scan_error(h + "1,0.5,0,1,0\n0.5,0.5,0,1,0\n"),
              HasSubstr("line 3, column 'time_s': time runs backward"));
  EXPECT_THAT(scan_error(h + "0,0.5,0,1,0\n1700000000,0.5,0,1,0\n"),
              HasSubstr("line 3, column 'time_s': 1700000000 is a Unix time, but the recording began with relative"));
  // The limits lphid applies to every reading (protocol/reading_checks.cpp).
  EXPECT_THAT(scan_error(h + "0,0,0,1,0\n"), HasSubstr("line 2, column 'temperature_k': 0 K is outside (0, 1000) K"));
  EXPECT_THAT(scan_error(h + "0,-1,0,1,0\n"), HasSubstr("column 'temperature_k'"));
  EXPECT_THAT(scan_error(h + "0,0.5,50,1,0\n"),
              HasSubstr("line 2, column 'field_t': 50 T is beyond the 30 T lphi accepts in magnitude: is it "
                        "in mT? 50 mT would be 0.05 T; map it with --column field_t=field_t:mT"));
  EXPECT_THAT(scan_error(h + "0,1500,0,1,0\n"),
              HasSubstr("line 2, column 'temperature_k': 1500 K is outside (0, 1000) K: is it in mK? 1500 mK "
                        "would be 1.5 K; map it with --column temperature_k=temperature_k:mK"));
  EXPECT_THAT(scan_error(h + "0,0.5,0,1,\n"), HasSubstr("line 2, column 'lockin_y_v': is empty while the other"));
  EXPECT_THAT(scan_error(h + "0,0.5,0,,1\n"), HasSubstr("line 2, column 'lockin_x_v': is empty while the other"));
  EXPECT_THAT(scan_error(h + "0,0.5,0,1\n"), HasSubstr("line 2: 4 cells, but the header has 5"));
  EXPECT_THAT(scan_error(h + "0,0.5,0,nan,0\n"), HasSubstr("line 2, column 'lockin_x_v'"));
  EXPECT_THAT(scan_error("time_s,temperature_k,field_t,lockin_x_v,lockin_y_v,lockin_overload\n0,0.5,0,1,0,2\n"),
              HasSubstr("line 2, column 'lockin_overload': '2' is not 0, 1, false or true"));
  EXPECT_THAT(scan_error("time_s,temperature_k,field_t,lockin_x_v,lockin_y_v,lockin_range_v\n0,0.5,0,1,0,-1\n"),
              HasSubstr("line 2, column 'lockin_range_v': must be > 0"));
}

TEST(RecordingCsv, RefusesFilesWithoutTheColumnsOrRows) {
  EXPECT_THAT(scan_error(""), HasSubstr("no header line"));
  EXPECT_THAT(scan_error(header), HasSubstr("no data rows"));
  EXPECT_THAT(scan_error("time_s,temperature_k,field_t,lockin_x_v\n0,1,0,1\n"),
              HasSubstr("line 1: no column 'lockin_y_v'"));
  EXPECT_THAT(scan_error("time_s,time_s,field_t,lockin_x_v,lockin_y_v\n"), HasSubstr("'time_s' appears twice"));
}

TEST(RecordingCsv, ColumnMappingRenamesAndIsNamedInErrors) {
  ColumnMap map;
  ASSERT_TRUE(add_column_mapping("time_s=t_sec", map).ok());
  ASSERT_TRUE(add_column_mapping("lockin_x_v = X", map).ok());
  RecordingSummary s;
  const std::string text = "t_sec,temperature_k,field_t,X,lockin_y_v\n0,0.5,0,1,0\n2,0.5,0,1,0\n";
  ASSERT_TRUE(scan(text, s, map).ok());
  EXPECT_EQ(s.rows, 2u);
  EXPECT_DOUBLE_EQ(s.last_t_s, 2.0);
  EXPECT_THAT(scan_error("t_sec,temperature_k,field_t,X,lockin_y_v\n0,0.5,0,oops,0\n", map),
              HasSubstr("line 2, column 'X' (lockin_x_v): 'oops' is not a number"));
  // The original name no longer counts once mapped.
  EXPECT_THAT(scan_error(std::string(header) + "0,0.5,0,1,0\n", map),
              HasSubstr("no column 't_sec' (given for time_s by --column)"));

  EXPECT_THAT(add_column_mapping("time_s", map).message(), HasSubstr("expected COLUMN=NAME"));
  EXPECT_THAT(add_column_mapping("=x", map).message(), HasSubstr("expected COLUMN=NAME"));
  EXPECT_THAT(add_column_mapping("voltage=v", map).message(), HasSubstr("'voltage' is not a column of a recording"));
  EXPECT_THAT(add_column_mapping("time_s=other", map).message(), HasSubstr("mapped twice"));
}

TEST(RecordingCsv, ColumnsInOtherUnitsAreReadInSi) {
  // 1 mT = 1e-3 T, 1 mK = 1e-3 K, 1 uV = 1e-6 V, 1 ms = 1e-3 s (SI
  // Brochure, 9th ed., table 7); 1 min = 60 s (table 8).
  ColumnMap map;
  ASSERT_TRUE(add_column_mapping("time_s=t:ms", map).ok());
  ASSERT_TRUE(add_column_mapping("temperature_k=T:mK", map).ok());
  ASSERT_TRUE(add_column_mapping("field_t=B:mT", map).ok());
  ASSERT_TRUE(add_column_mapping("lockin_x_v=X:uV", map).ok());
  ASSERT_TRUE(add_column_mapping("lockin_y_v:uV", map).ok());
  ASSERT_TRUE(add_column_mapping("lockin_time_constant_s=tc:ms", map).ok());
  std::istringstream in("t,T,B,X,lockin_y_v,tc\n0,25,-40,5,0.5,300\n1500,25.5,45,,,\n");
  RecordingReader reader;
  ASSERT_TRUE(reader.open(in, "rec.csv", map).ok());
  RecordingRow row;
  Status status;
  ASSERT_TRUE(reader.next(row, status)) << status.message();
  EXPECT_EQ(row.t_s, 0.0);
  EXPECT_EQ(row.temperature_k, 25 * 1e-3);
  EXPECT_EQ(row.field_t, -40 * 1e-3);
  EXPECT_EQ(row.x_v, 5 * 1e-6);
  EXPECT_EQ(row.y_v, 0.5 * 1e-6);
  EXPECT_EQ(row.time_constant_s, 300 * 1e-3);
  ASSERT_TRUE(reader.next(row, status)) << status.message();
  EXPECT_EQ(row.t_s, 1500 * 1e-3);
  EXPECT_EQ(row.field_t, 45 * 1e-3);  // 45 mT: within the limit once read in mT
  EXPECT_FALSE(row.has_lockin);

  ColumnMap minutes;
  ASSERT_TRUE(add_column_mapping("time_s:min", minutes).ok());
  RecordingSummary summary;
  ASSERT_TRUE(scan(std::string(header) + "0,0.5,0,1,0\n2.5,0.5,0,1,0\n", summary, minutes).ok());
  EXPECT_EQ(summary.last_t_s, 150.0);

  // A value still beyond the limit in the stated unit says how it was read.
  ColumnMap gauss;
  ASSERT_TRUE(add_column_mapping("field_t=B:G", gauss).ok());
  EXPECT_THAT(scan_error("time_s,temperature_k,B,lockin_x_v,lockin_y_v\n0,0.5,4e6,1,0\n", gauss),
              HasSubstr("rec.csv line 2, column 'B' (field_t in G): 400 T is beyond the 30 T lphi accepts "
                        "in magnitude (read as 4e+06 G)"));
  EXPECT_THAT(add_column_mapping("field_t=B:K", gauss).message(), HasSubstr("'field_t' is mapped twice"));
  ColumnMap wrong;
  EXPECT_THAT(add_column_mapping("lockin_x_v=X:mT", wrong).message(),
              HasSubstr("'mT' is a unit of field; lockin_x_v is a voltage: use V, mV, uV"));
  EXPECT_THAT(add_column_mapping("lockin_overload=O:V", wrong).message(),
              HasSubstr("'lockin_overload' has no unit to convert"));
}

TEST(RecordingCsv, ASemicolonRecordingSaysWhichDelimiterItFound) {
  EXPECT_THAT(scan_error("time_s;temperature_k;field_t;lockin_x_v;lockin_y_v\n0;0,5;0;1;0\n"),
              HasSubstr("rec.csv line 1 looks ';'-separated ('time_s', 'temperature_k', 'field_t', "
                        "'lockin_x_v', ...); lphi reads comma-separated files"));
  EXPECT_THAT(scan_error(std::string(header) + "0;0.5;0;1;0\n"),
              HasSubstr("line 2: 1 cells, but the header has 5 (the line looks ';'-separated"));
}

}  // namespace
