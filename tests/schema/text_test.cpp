// schema/text/text.hpp: trim and the strict number parser that every lphi
// program shares. The expected doubles are the correctly rounded values of
// the decimal strings (IEEE 754 round-to-nearest, as the compiler rounds the
// same literals), so the comparisons are exact.
#include <gmock/gmock.h>
#include <gtest/gtest.h>

#include <string>

#include "schema/text/text.hpp"

namespace lphi::text {
namespace {

using ::testing::HasSubstr;

TEST(Trim, RemovesTheSixBlanksOnBothSidesOnly) {
  EXPECT_EQ(trim("  a b \t"), "a b");
  EXPECT_EQ(trim("\r\n\v\fx\r\n"), "x");
  EXPECT_EQ(trim(""), "");
  EXPECT_EQ(trim(" \t "), "");
  EXPECT_EQ(trim("a"), "a");
  // Other bytes (a NUL, UTF-8 of a no-break space) are content, not blanks.
  EXPECT_EQ(trim(std::string("\0a", 2)), std::string("\0a", 2));
  EXPECT_EQ(trim("\xC2\xA0" "a"), "\xC2\xA0" "a");
}

TEST(ParseNumberText, AcceptsDecimalAndScientificWithOneSign) {
  EXPECT_EQ(parse_number("1e-3"), 1e-3);
  EXPECT_EQ(parse_number(" -0.25\r"), -0.25);
  EXPECT_EQ(parse_number("+1.234E-03"), 1.234e-3);
  EXPECT_EQ(parse_number("7"), 7.0);
  EXPECT_EQ(parse_number(".5"), 0.5);
  EXPECT_EQ(parse_number("1."), 1.0);
  // The largest double parses; one decimal order more does not.
  EXPECT_EQ(parse_number("1.7976931348623157e308"), 1.7976931348623157e308);
}

TEST(ParseNumberText, NamesTheReasonOfEachRefusal) {
  std::string why;
  EXPECT_FALSE(parse_number("", &why));
  EXPECT_EQ(why, "is empty");
  EXPECT_FALSE(parse_number("  ", &why));
  EXPECT_EQ(why, "is empty");
  EXPECT_FALSE(parse_number("1.5x", &why));
  EXPECT_EQ(why, "'1.5x' is not a number");
  EXPECT_FALSE(parse_number("+-1", &why));
  EXPECT_EQ(why, "'+-1' is not a number");
  EXPECT_FALSE(parse_number("++1", &why));
  EXPECT_FALSE(parse_number("+", &why));
  EXPECT_FALSE(parse_number("0x10", &why));
  EXPECT_EQ(why, "'0x10' is not a number");
  EXPECT_FALSE(parse_number("1e400", &why));
  EXPECT_EQ(why, "'1e400' is out of the range of a double");
  EXPECT_FALSE(parse_number("-1e400", &why));
  EXPECT_THAT(why, HasSubstr("out of the range"));
  for (const char* not_finite : {"nan", "NaN", "inf", "-Infinity"}) {
    EXPECT_FALSE(parse_number(not_finite, &why)) << not_finite;
    EXPECT_THAT(why, HasSubstr("is not a finite number")) << not_finite;
  }
  // Without a place for the reason the refusal is the same.
  EXPECT_FALSE(parse_number("1 5"));
}

TEST(QuoteCell, ShortensARunawayCell) {
  EXPECT_EQ(quote_cell("abc"), "'abc'");
  EXPECT_EQ(quote_cell(std::string(40, 'z')), "'" + std::string(40, 'z') + "'");
  EXPECT_EQ(quote_cell(std::string(41, 'z')), "'" + std::string(40, 'z') + "...'");
  EXPECT_EQ(quote_cell("abcdef", 3), "'abc...'");
}

}  // namespace
}  // namespace lphi::text
