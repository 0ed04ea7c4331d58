#include "daemon/client/format.hpp"

#include <fmt/format.h>
#include <algorithm>
#include <cmath>
#include <cstdio>

namespace lphi::client {

std::string format_number(double value, int significant) {
  if (!std::isfinite(value)) return std::isnan(value) ? "nan" : (value > 0 ? "inf" : "-inf");
  return fmt::format("{:.{}g}", value, significant);
}

std::string format_with_error(double value, std::optional<double> error,
                              std::string_view unit) {
  std::string text;
  const bool usable = error && std::isfinite(*error) && *error > 0.0 && std::isfinite(value);
  if (usable) {
    // Two significant digits of the error fix the last decimal shown.
    const int exponent = static_cast<int>(std::floor(std::log10(*error)));
    const int decimals = std::max(1 - exponent, 0);
    // Beyond about 8 significant digits (noise-free data) the digits tell
    // nothing; the value is then shown to 8 digits and the error on its own.
    const int magnitude =
        value != 0.0 ? static_cast<int>(std::floor(std::log10(std::fabs(value)))) : 0;
    if (decimals == 0 && exponent > 6) {
      text = fmt::format("{:.3g} +/- {:.2g}", value, *error);
    } else if (magnitude + decimals + 1 > 8) {
      text = fmt::format("{:.8g} +/- {:.2g}", value, *error);
    } else {
      text = fmt::format("{:.{}f} +/- {:.{}f}", value, decimals, *error, decimals);
    }
  } else {
    text = format_number(value, 4);
  }
  if (!unit.empty()) {
    text += ' ';
    text += unit;
  }
  return text;
}

std::string format_length(double length_m, std::optional<double> error_m) {
  const bool nanometres = std::fabs(length_m) < 1e-6;
  const double scale = nanometres ? 1e9 : 1e6;
  std::optional<double> error;
  if (error_m) error = *error_m * scale;
  return format_with_error(length_m * scale, error, nanometres ? "nm" : "um");
}

std::string format_field_mt(double field_t, std::optional<double> error_t) {
  std::optional<double> error;
  if (error_t) error = *error_t * 1e3;
  return format_with_error(field_t * 1e3, error, "mT");
}

std::string format_temperature_mk(double temperature_k, std::optional<double> error_k) {
  std::optional<double> error;
  if (error_k) error = *error_k * 1e3;
  return format_with_error(temperature_k * 1e3, error, "mK");
}

Table::Table(std::vector<std::string> header, std::size_t indent)
    : header_(std::move(header)), indent_(indent) {}

void Table::add(std::vector<std::string> row) {
  if (!header_.empty()) row.resize(header_.size());
  rows_.push_back(std::move(row));
}

void Table::print(std::ostream& out) const {
  std::vector<std::size_t> width(header_.size(), 0);
  auto widen = [&](const std::vector<std::string>& cells) {
    if (width.size() < cells.size()) width.resize(cells.size(), 0);
    for (std::size_t c = 0; c < cells.size(); ++c) width[c] = std::max(width[c], cells[c].size());
  };
  widen(header_);
  for (const auto& row : rows_) widen(row);
  auto line = [&](const std::vector<std::string>& cells) {
    std::string text(indent_, ' ');
    for (std::size_t c = 0; c < cells.size(); ++c) {
      text += cells[c];
      if (c + 1 < cells.size()) text += std::string(width[c] - cells[c].size() + 2, ' ');
    }
    while (!text.empty() && text.back() == ' ') text.pop_back();
    out << text << '\n';
  };
  if (!header_.empty()) line(header_);
  for (const auto& row : rows_) line(row);
}

}  // namespace lphi::client
