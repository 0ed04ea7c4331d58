#include "drivers/sim/scpi.hpp"

#include <fmt/format.h>
#include <cctype>
#include <cmath>
#include <cstdio>

#include "schema/text/text.hpp"

namespace lphi::sim::scpi {
namespace {

using text::trim;

std::string upper(std::string_view s) {
  std::string out(s);
  for (char& c : out) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  return out;
}

Error make(int code, const char* message, std::string detail) {
  return Error{code, message, std::move(detail)};
}

bool node_matches(std::string_view pattern, std::string_view node) {
  std::string short_form;
  for (char c : pattern)
    if (std::isupper(static_cast<unsigned char>(c)) || c == '*' || std::isdigit(static_cast<unsigned char>(c)))
      short_form += c;
  return node == short_form || node == upper(pattern);
}

}  // namespace

Error undefined_header(std::string d) { return make(-113, "Undefined header", std::move(d)); }
Error syntax_error(std::string d) { return make(-102, "Syntax error", std::move(d)); }
Error missing_parameter(std::string d) { return make(-109, "Missing parameter", std::move(d)); }
Error parameter_not_allowed(std::string d) { return make(-108, "Parameter not allowed", std::move(d)); }
Error data_type_error(std::string d) { return make(-104, "Data type error", std::move(d)); }
Error data_out_of_range(std::string d) { return make(-222, "Data out of range", std::move(d)); }
Error illegal_parameter(std::string d) { return make(-224, "Illegal parameter value", std::move(d)); }
Error too_much_data(std::string d) { return make(-223, "Too much data", std::move(d)); }

std::string format_error(const Error& e) {
  std::string text = e.message;
  if (!e.detail.empty()) text += ";" + e.detail;
  // A quote inside a SCPI string is doubled.
  std::string quoted;
  for (char c : text) {
    if (c == '"') quoted += '"';
    quoted += c;
  }
  return std::to_string(e.code) + ",\"" + quoted + "\"";
}

void ErrorQueue::push(Error e) {
  if (errors_.size() >= kErrorQueueDepth) return;
  if (errors_.size() == kErrorQueueDepth - 1) {
    errors_.push_back(make(-350, "Queue overflow", ""));
    return;
  }
  errors_.push_back(std::move(e));
}

Error ErrorQueue::pop() {
  if (errors_.empty()) return make(0, "No error", "");
  Error e = std::move(errors_.front());
  errors_.pop_front();
  return e;
}

std::optional<Request> parse(std::string_view line, Error& error, bool& failed) {
  failed = false;
  line = trim(line);
  if (line.empty()) return std::nullopt;
  Request r;
  const std::size_t space = line.find_first_of(" \t");
  std::string_view header = line.substr(0, space);
  std::string_view rest = space == std::string_view::npos ? std::string_view{} : trim(line.substr(space));
  if (!header.empty() && header.front() == ':') header.remove_prefix(1);
  r.header = std::string(header);
  if (!header.empty() && header.back() == '?') {
    r.query = true;
    header.remove_suffix(1);
  }
  for (unsigned char c : header) {
    if (!(std::isalnum(c) || c == ':' || c == '*' || c == '_')) {
      error = syntax_error(std::string(line.substr(0, 40)));
      failed = true;
      return std::nullopt;
    }
  }
  std::size_t start = 0;
  while (true) {
    const std::size_t colon = header.find(':', start);
    const std::string_view node = header.substr(start, colon == std::string_view::npos ? header.npos : colon - start);
    if (node.empty()) {
      error = syntax_error(r.header);
      failed = true;
      return std::nullopt;
    }
    r.nodes.push_back(upper(node));
    if (colon == std::string_view::npos) break;
    start = colon + 1;
  }
  if (!rest.empty()) {
    std::size_t from = 0;
    while (true) {
      const std::size_t comma = rest.find(',', from);
      r.args.emplace_back(trim(rest.substr(from, comma == std::string_view::npos ? rest.npos : comma - from)));
      if (comma == std::string_view::npos) break;
      from = comma + 1;
    }
  }
  return r;
}

bool matches(std::string_view pattern, const Request& r) {
  std::size_t start = 0;
  for (std::size_t i = 0; i < r.nodes.size(); ++i) {
    if (start > pattern.size()) return false;
    const std::size_t colon = pattern.find(':', start);
    const std::string_view p = pattern.substr(start, colon == std::string_view::npos ? pattern.npos : colon - start);
    if (!node_matches(p, r.nodes[i])) return false;
    if (colon == std::string_view::npos) return i + 1 == r.nodes.size();
    start = colon + 1;
  }
  return false;
}

std::string format_number(double v) {
  return fmt::format("{:.12g}", v);
}

}  // namespace lphi::sim::scpi
