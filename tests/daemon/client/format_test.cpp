// Unit tests of the client's human-readable formatting (daemon/client/format.hpp).
// The expected strings follow the rule stated in format.hpp: lengths in nm
// below 1 um, else um; the error rounded to two significant digits and the
// value to the same decimal place (the usual convention for quoting
// measurements, common practice).

#include <limits>
#include <sstream>

#include <gtest/gtest.h>

#include "daemon/client/format.hpp"

namespace lphi::client {
namespace {

TEST(Format, LengthUnitSwitchesAtOneMicrometre) {
  EXPECT_EQ(format_length(212.3e-9), "212.3 nm");
  EXPECT_EQ(format_length(999e-9), "999 nm");
  EXPECT_EQ(format_length(1.0e-6), "1 um");
  EXPECT_EQ(format_length(2.5e-6), "2.5 um");
}

TEST(Format, ValueIsRoundedToItsError) {
  EXPECT_EQ(format_length(212.3456e-9, 1.537e-9), "212.3 +/- 1.5 nm");
  EXPECT_EQ(format_length(1.23456e-6, 0.0123e-6), "1.235 +/- 0.012 um");
  EXPECT_EQ(format_with_error(0.98765, 0.0042, ""), "0.9877 +/- 0.0042");
  EXPECT_EQ(format_with_error(1234.7, 56.0, "K"), "1235 +/- 56 K");
  // Noise-free data: 8 significant digits, the error on its own.
  EXPECT_EQ(format_length(199.9999999715e-9, 2.0e-18), "200 +/- 2e-09 nm");
  EXPECT_EQ(format_length(199.99871e-9, 2.0e-15), "199.99871 +/- 2e-06 nm");
  // A zero or missing error (noise-free data) falls back to 4 significant digits.
  EXPECT_EQ(format_length(200e-9, 0.0), "200 nm");
}

TEST(Format, FieldsInMilliteslaAndTemperaturesInMillikelvin) {
  EXPECT_EQ(format_field_mt(4.11e-3), "4.11 mT");
  EXPECT_EQ(format_field_mt(0.05), "50 mT");
  EXPECT_EQ(format_temperature_mk(0.1, 0.0081), "100.0 +/- 8.1 mK");
}

TEST(Format, NonFiniteValuesAreSpelledOut) {
  EXPECT_EQ(format_number(std::numeric_limits<double>::quiet_NaN()), "nan");
  EXPECT_EQ(format_length(std::numeric_limits<double>::infinity(), 1e-9), "inf um");
}

// The one table printer: columns as wide as their widest cell, two spaces
// apart, no blanks at a line's end. The expected text is written out by hand.
TEST(Table, HeaderTableIsPaddedAndTrimmed) {
  Table t({"id", "rule", "message"});
  t.add({"1", "fit-chi2", "chi2_red 12 > 5"});
  t.add({"10", "gap"});  // a short row is padded with empty cells
  std::ostringstream out;
  t.print(out);
  EXPECT_EQ(out.str(),
            "id  rule      message\n"
            "1   fit-chi2  chi2_red 12 > 5\n"
            "10  gap\n");
  EXPECT_EQ(t.rows(), 2u);
}

TEST(Table, LabelValueListIsIndented) {
  Table t({}, 2);
  t.add("L_phi", "212.3 nm");
  t.add("chi2_red", "1.02");
  std::ostringstream out;
  t.print(out);
  EXPECT_EQ(out.str(),
            "  L_phi     212.3 nm\n"
            "  chi2_red  1.02\n");
  std::ostringstream empty;
  Table({"a"}).print(empty);
  EXPECT_EQ(empty.str(), "a\n");
}

}  // namespace
}  // namespace lphi::client
