#include "daemon/client/format.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>

namespace lphi::client {

std::string format_number(double value, int significant) {
  if (!std::isfinite(value)) return std::isnan(value) ? "nan" : (value > 0 ? "inf" : "-inf");
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, "%.*g", significant, value);
  return buffer;
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
    char buffer[96];
    if (decimals == 0 && exponent > 6) {
      std::snprintf(buffer, sizeof buffer, "%.3g +/- %.2g", value, *error);
    } else if (magnitude + decimals + 1 > 8) {
      std::snprintf(buffer, sizeof buffer, "%.8g +/- %.2g", value, *error);
    } else {
      std::snprintf(buffer, sizeof buffer, "%.*f +/- %.*f", decimals, value, decimals, *error);
    }
    text = buffer;
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

void TextTable::add(std::string label, std::string value) {
  rows_.emplace_back(std::move(label), std::move(value));
}

void TextTable::print(std::ostream& out) const {
  std::size_t width = 0;
  for (const auto& row : rows_) width = std::max(width, row.first.size());
  for (const auto& [label, value] : rows_) {
    out << "  " << label << std::string(width - label.size() + 2, ' ') << value << '\n';
  }
}

}  // namespace lphi::client
