// Human-readable output of the terminal client: numbers in units chosen for
// reading (lengths in nm or um, fields in mT, temperatures in mK), values
// with their 1-sigma errors, and a two-column table. SI values in, text out;
// the JSON output never goes through here.
#pragma once

#include <optional>
#include <ostream>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace lphi::client {

// A plain number with `significant` significant digits ("%.*g").
std::string format_number(double value, int significant = 4);

// value +/- error in one unit. With a usable error the error gets two
// significant digits and the value is rounded to the same decimal place;
// otherwise the value gets four significant digits.
std::string format_with_error(double value, std::optional<double> error,
                              std::string_view unit);

// L in nm when below 1 um, else in um: "212.3 +/- 1.5 nm", "1.204 um".
std::string format_length(double length_m, std::optional<double> error_m = std::nullopt);
// B in mT.
std::string format_field_mt(double field_t, std::optional<double> error_t = std::nullopt);
// T in mK.
std::string format_temperature_mk(double temperature_k,
                                  std::optional<double> error_k = std::nullopt);

// Rows of "label  value", printed with the labels padded to one width.
class TextTable {
 public:
  void add(std::string label, std::string value);
  void print(std::ostream& out) const;

 private:
  std::vector<std::pair<std::string, std::string>> rows_;
};

}  // namespace lphi::client
