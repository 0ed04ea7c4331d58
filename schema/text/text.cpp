#include "schema/text/text.hpp"

#include <charconv>
#include <cmath>
#include <system_error>

namespace lphi::text {

std::string_view trim(std::string_view s) {
  while (!s.empty() && is_blank(s.front())) s.remove_prefix(1);
  while (!s.empty() && is_blank(s.back())) s.remove_suffix(1);
  return s;
}

std::string quote_cell(std::string_view cell, std::size_t max_shown) {
  std::string shown = "'";
  shown += cell.substr(0, max_shown);
  if (cell.size() > max_shown) shown += "...";
  shown += "'";
  return shown;
}

std::optional<double> parse_number(std::string_view text, std::string* why) {
  auto fail = [&](std::string reason) -> std::optional<double> {
    if (why != nullptr) *why = std::move(reason);
    return std::nullopt;
  };
  const std::string_view cell = text;
  text = trim(text);
  if (text.empty()) return fail("is empty");
  // from_chars accepts '-' but not '+'; after a '+' no second sign may follow.
  if (text.front() == '+') {
    text.remove_prefix(1);
    if (text.empty() || text.front() == '+' || text.front() == '-') {
      return fail(quote_cell(cell) + " is not a number");
    }
  }
  double value = 0.0;
  const char* first = text.data();
  const char* last = text.data() + text.size();
  const auto [ptr, ec] = std::from_chars(first, last, value, std::chars_format::general);
  if (ec == std::errc::result_out_of_range) {
    return fail(quote_cell(cell) + " is out of the range of a double");
  }
  if (ec != std::errc{} || ptr != last) return fail(quote_cell(cell) + " is not a number");
  if (!std::isfinite(value)) return fail(quote_cell(cell) + " is not a finite number");
  return value;
}

}  // namespace lphi::text
