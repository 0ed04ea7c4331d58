#include "daemon/client/table_checks.hpp"

#include <algorithm>
#include <cmath>

#include <fmt/format.h>

#include "schema/protocol/limits.hpp"

namespace lphi::client {

namespace {

// The row whose |value| is largest (NaN-free input: the readers refuse NaN).
std::size_t row_of_largest_magnitude(const std::vector<double>& values) {
  std::size_t best = 0;
  for (std::size_t i = 1; i < values.size(); ++i) {
    if (std::abs(values[i]) > std::abs(values[best])) best = i;
  }
  return best;
}

std::size_t count_if_refused(const std::vector<double>& values, bool (*in_range)(double)) {
  return static_cast<std::size_t>(
      std::count_if(values.begin(), values.end(), [&](double v) { return !in_range(v); }));
}

bool field_ok(double b) { return protocol::limits::field_in_range(b); }
bool temperature_ok(double t) { return protocol::limits::temperature_in_range(t); }

std::string rows_beyond(std::size_t n) {
  return n > 1 ? fmt::format(" ({} rows are beyond the limit)", n) : std::string();
}

}  // namespace

const std::vector<std::string>& fit_columns() {
  static const std::vector<std::string> columns = {"field_t",    "rsq_ohm", "r_ohm",
                                                   "lockin_x_v", "t_s",     "time_constant_s"};
  return columns;
}

const std::vector<std::string>& dephasing_columns() {
  static const std::vector<std::string> columns = {"temperature_k", "lphi_m", "lphi_err_m"};
  return columns;
}

Status check_sweep_units(const CsvTable& table, const ColumnMap& map,
                         const std::vector<double>& field_t, std::string_view signal_column,
                         const std::vector<double>& signal, double squares, std::ostream& warn) {
  if (!field_t.empty()) {
    const std::size_t i = row_of_largest_magnitude(field_t);
    if (auto r = protocol::limits::field_refusal(field_t[i])) {
      return Status::invalid_input(
          limit_message(where_mapped(table, map, i, "field_t"), *r, "field_t", map,
                        field_t[i] / map.to_si("field_t")) +
          rows_beyond(count_if_refused(field_t, field_ok)));
    }
  }
  // Only a unit the user stated is questioned; an unmapped column is ohm.
  const std::string unit = map.unit(signal_column);
  if (signal_column != "lockin_x_v" && !unit.empty() && map.to_si(signal_column) > 1.0 &&
      !signal.empty()) {
    std::vector<double> sorted = signal;
    const auto mid = sorted.begin() + static_cast<std::ptrdiff_t>(sorted.size() / 2);
    std::nth_element(sorted.begin(), mid, sorted.end());
    const double rsq_ohm = *mid / squares;
    if (rsq_ohm >= si::von_klitzing_ohm) {
      warn << fmt::format(
          "lphi fit: warning: {} column {}: the median sheet resistance is {:.4g} ohm as read in "
          "{}, at or above h/e^2 = {:.4g} ohm where weak localization does not apply: is the "
          "column in ohm? (map it with --column {}={})\n",
          table.source_name(), map.describe(signal_column), rsq_ohm, unit, si::von_klitzing_ohm,
          signal_column, map.file_name(signal_column));
    }
  }
  return Status::success();
}

Status check_dephasing_units(const CsvTable& table, const ColumnMap& map,
                             const std::vector<double>& temperature_k,
                             const std::vector<double>& lphi_m,
                             const std::vector<double>& lphi_err_m) {
  for (std::size_t i = 0; i < temperature_k.size(); ++i) {
    if (temperature_k[i] > 0.0) {
      if (auto r = protocol::limits::temperature_refusal(temperature_k[i])) {
        return Status::invalid_input(
            limit_message(where_mapped(table, map, i, "temperature_k"), *r, "temperature_k", map,
                          temperature_k[i] / map.to_si("temperature_k")) +
            rows_beyond(count_if_refused(temperature_k, temperature_ok)));
      }
    }
  }
  for (const auto* column : {&lphi_m, &lphi_err_m}) {
    const std::string name = column == &lphi_m ? "lphi_m" : "lphi_err_m";
    for (std::size_t i = 0; i < column->size(); ++i) {
      const double v = (*column)[i];
      if (!(v >= max_plausible_lphi_m)) continue;
      std::string message = fmt::format("{}: {:.6g} m is no phase-coherence length (lphi takes {} "
                                        "below {:g} m)",
                                        where_mapped(table, map, i, name), v, name,
                                        max_plausible_lphi_m);
      if (map.unit(name).empty()) {
        message += fmt::format(": is it in nm or um? map it with --column {}={}:nm (or :um)",
                               name, map.file_name(name));
      } else {
        message += fmt::format(" (read as {:.6g} {})", v / map.to_si(name), map.unit(name));
      }
      return Status::invalid_input(message);
    }
  }
  return Status::success();
}

}  // namespace lphi::client
