// SCPI-style command lines (IEEE 488.2 conventions) as lphi-sim's instruments
// read them: one command per line, a header of colon-separated nodes, '?' at
// the end of a query, parameters after white space separated by commas.
// Nodes match case-insensitively in their short form (the upper-case part of
// the pattern, "MEAS" for "MEASure") or their long form ("MEASURE"); a
// leading colon is allowed. Errors are the standard SCPI codes, kept in a
// bounded queue read with SYST:ERR?.
#pragma once

#include <cstddef>
#include <deque>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace lphi::sim::scpi {

inline constexpr std::size_t kMaxLineBytes = 256;   // longer lines get -223 and are discarded
inline constexpr std::size_t kErrorQueueDepth = 16;

struct Error {
  int code = 0;
  std::string message;   // "Undefined header", ...
  std::string detail;    // the offending text, may be empty
};

Error undefined_header(std::string detail);   // -113
Error syntax_error(std::string detail);       // -102
Error missing_parameter(std::string detail);  // -109
Error parameter_not_allowed(std::string detail);  // -108
Error data_type_error(std::string detail);    // -104
Error data_out_of_range(std::string detail);  // -222
Error illegal_parameter(std::string detail);  // -224
Error too_much_data(std::string detail);      // -223

// `code,"message[;detail]"`, the form SYST:ERR? replies with.
std::string format_error(const Error& e);

// First in, first out. When full, the newest entry becomes -350 "Queue
// overflow" and later errors are dropped until the queue is read (SCPI 1999,
// 21.8).
class ErrorQueue {
 public:
  void push(Error e);
  Error pop();                  // 0,"No error" when empty
  void clear() { errors_.clear(); }
  std::size_t size() const { return errors_.size(); }
 private:
  std::deque<Error> errors_;
};

struct Request {
  std::string header;               // as written, without the leading colon
  std::vector<std::string> nodes;   // upper-cased, without '?'
  bool query = false;
  std::vector<std::string> args;    // trimmed
};

// An empty (or all-blank) line gives std::nullopt and no error.
std::optional<Request> parse(std::string_view line, Error& error, bool& failed);

// pattern: "MEASure:ALL", "*IDN", "SYSTem:ERRor".
bool matches(std::string_view pattern, const Request& r);

// %.12g, the form every numeric reply uses.
std::string format_number(double v);

}  // namespace lphi::sim::scpi
