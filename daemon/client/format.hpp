// Human-readable output of the terminal client: numbers in units chosen for
// reading (lengths in nm or um, fields in mT, temperatures in mK), values
// with their 1-sigma errors, and the tables. SI values in, text out;
// the JSON output never goes through here.
#pragma once

#include <cstddef>
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

// The one table printer of lphi's human output: columns padded to their
// widest cell and two spaces apart, each line indented by `indent` spaces,
// no trailing blanks. With a header, the header is the first line and every
// row has as many cells as it (padded with empty cells, longer rows cut);
// without one, rows of any length ("label  value" lists).
class Table {
 public:
  explicit Table(std::vector<std::string> header = {}, std::size_t indent = 0);
  void add(std::vector<std::string> row);
  // A "label  value" row.
  void add(std::string label, std::string value) { add({std::move(label), std::move(value)}); }
  void print(std::ostream& out) const;
  std::size_t rows() const { return rows_.size(); }

 private:
  std::vector<std::string> header_;
  std::size_t indent_;
  std::vector<std::vector<std::string>> rows_;
};

}  // namespace lphi::client
