// The small text helpers every lphi program shares: trimming blanks and
// reading one number strictly. One definition each, for the CSV readers, the
// instrument drivers, lphi-sim's SCPI parser and the command lines.
//
// Promises: pure functions, no locale (blanks are the six ASCII white-space
// characters, numbers are parsed with std::from_chars), no allocation except
// for the reason of a failure. Safe to call from any thread.
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <string_view>

namespace lphi::text {

// Space, tab, CR, LF, vertical tab and form feed: what isspace() calls
// white space in the "C" locale.
constexpr bool is_blank(char c) {
  return c == ' ' || c == '\t' || c == '\r' || c == '\n' || c == '\v' || c == '\f';
}

// s without its leading and trailing blanks (a view into s).
std::string_view trim(std::string_view s);

// A finite double from the whole of `text` (blanks around it allowed):
// decimal or scientific notation, an optional leading '+' (printf's "%+g" and
// SCPI's NR3 write one) or '-'. Refused, with *why set to a short reason when
// why is given: an empty text ("is empty"), anything else around the number,
// a second sign, hexadecimal ("'0x10' is not a number"), a value beyond a
// double ("... is out of the range of a double") and nan/inf ("... is not a
// finite number"). The reason quotes the text, shortened by quote_cell().
std::optional<double> parse_number(std::string_view text, std::string* why = nullptr);

// 'cell' in single quotes for an error message, cut after max_shown
// characters with "..." so that a runaway cell (a binary file read by
// mistake) does not flood a terminal or a log.
std::string quote_cell(std::string_view cell, std::size_t max_shown = 40);

}  // namespace lphi::text
