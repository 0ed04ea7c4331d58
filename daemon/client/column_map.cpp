#include "daemon/client/column_map.hpp"

#include <array>

#include <fmt/format.h>

#include "schema/text/csv_reader.hpp"
#include "schema/text/text.hpp"

namespace lphi::client {

namespace {

constexpr std::array<Quantity, 6> all_quantities = {Quantity::field,   Quantity::resistance,
                                                    Quantity::temperature, Quantity::voltage,
                                                    Quantity::length,  Quantity::time};

// "u" written as the micro sign U+00B5 (UTF-8 C2 B5) is the same unit.
std::string without_micro_sign(std::string_view name) {
  constexpr std::string_view micro = "\xC2\xB5";
  if (name.substr(0, micro.size()) == micro) return "u" + std::string(name.substr(micro.size()));
  return std::string(name);
}

std::string joined(const std::vector<std::string>& names) {
  std::string out;
  for (const auto& n : names) out += (out.empty() ? "" : ", ") + n;
  return out;
}

}  // namespace

const std::vector<Unit>& unit_table() {
  static const std::vector<Unit> table = {
      {"T", Quantity::field, 1.0},           {"mT", Quantity::field, 1e-3},
      {"uT", Quantity::field, 1e-6},         {"G", Quantity::field, 1e-4},
      {"ohm", Quantity::resistance, 1.0},    {"kohm", Quantity::resistance, 1e3},
      {"Mohm", Quantity::resistance, 1e6},   {"K", Quantity::temperature, 1.0},
      {"mK", Quantity::temperature, 1e-3},   {"V", Quantity::voltage, 1.0},
      {"mV", Quantity::voltage, 1e-3},       {"uV", Quantity::voltage, 1e-6},
      {"m", Quantity::length, 1.0},          {"um", Quantity::length, 1e-6},
      {"nm", Quantity::length, 1e-9},        {"s", Quantity::time, 1.0},
      {"ms", Quantity::time, 1e-3},          {"min", Quantity::time, 60.0},
  };
  return table;
}

std::optional<Unit> find_unit(std::string_view name) {
  const std::string plain = without_micro_sign(name);
  for (const auto& u : unit_table()) {
    if (u.name == plain) return u;
  }
  return std::nullopt;
}

std::string_view quantity_name(Quantity q) {
  switch (q) {
    case Quantity::field: return "field";
    case Quantity::resistance: return "resistance";
    case Quantity::temperature: return "temperature";
    case Quantity::voltage: return "voltage";
    case Quantity::length: return "length";
    case Quantity::time: return "time";
  }
  return "";
}

std::string_view si_unit(Quantity q) {
  for (const auto& u : unit_table()) {
    if (u.quantity == q && u.to_si == 1.0) return u.name;
  }
  return "";
}

std::string unit_list(Quantity q) {
  std::string out;
  for (const auto& u : unit_table()) {
    if (u.quantity == q) out += (out.empty() ? "" : ", ") + std::string(u.name);
  }
  return out;
}

std::optional<Quantity> quantity_of_column(std::string_view column) {
  if (column == "t") return Quantity::time;
  struct Suffix {
    std::string_view text;
    Quantity quantity;
  };
  constexpr std::array<Suffix, 6> suffixes = {{{"_t", Quantity::field},
                                               {"_ohm", Quantity::resistance},
                                               {"_k", Quantity::temperature},
                                               {"_v", Quantity::voltage},
                                               {"_m", Quantity::length},
                                               {"_s", Quantity::time}}};
  for (const auto& s : suffixes) {
    if (column.size() > s.text.size() &&
        column.substr(column.size() - s.text.size()) == s.text) {
      return s.quantity;
    }
  }
  return std::nullopt;
}

Status ColumnMap::add(std::string_view mapping, const std::vector<std::string>& columns,
                      std::string_view what) {
  const std::string arg(mapping);
  auto refuse = [&](const std::string& why) {
    return Status::invalid_input("--column '" + arg + "': " + why);
  };
  const auto eq = mapping.find('=');
  std::string column, name, unit_text;
  if (eq == std::string_view::npos) {
    // COLUMN:UNIT, the file's column under lphi's own name.
    const auto colon = mapping.find(':');
    if (colon == std::string_view::npos || colon == 0 || colon + 1 == mapping.size()) {
      return refuse("expected COLUMN=NAME, COLUMN=NAME:UNIT or COLUMN:UNIT, e.g. time_s=t_sec "
                    "or field_t=B:mT");
    }
    column = std::string(text::trim(mapping.substr(0, colon)));
    name = column;
    unit_text = std::string(text::trim(mapping.substr(colon + 1)));
  } else {
    if (eq == 0 || eq + 1 == mapping.size()) {
      return refuse("expected COLUMN=NAME, COLUMN=NAME:UNIT or COLUMN:UNIT, e.g. time_s=t_sec "
                    "or field_t=B:mT");
    }
    column = std::string(text::trim(mapping.substr(0, eq)));
    std::string_view rest = mapping.substr(eq + 1);
    // The unit follows the last ':' so that a file's name may hold one.
    if (const auto colon = rest.rfind(':'); colon != std::string_view::npos) {
      unit_text = std::string(text::trim(rest.substr(colon + 1)));
      rest = rest.substr(0, colon);
      if (unit_text.empty()) return refuse("no unit after ':'");
    }
    name = std::string(text::trim(rest));
  }
  bool known = false;
  for (const auto& c : columns) known = known || c == column;
  if (!known) {
    return refuse("'" + column + "' is not a column of " + std::string(what) + " (" +
                  joined(columns) + ")");
  }
  if (name.empty()) return refuse("the file's column name is empty");
  if (columns_.count(column) != 0) return refuse("'" + column + "' is mapped twice");
  MappedColumn m;
  m.file_name = name;
  if (!unit_text.empty()) {
    const auto q = quantity_of_column(column);
    if (!q) return refuse("'" + column + "' has no unit to convert (map only its name)");
    const auto u = find_unit(unit_text);
    if (!u || u->quantity != *q) {
      return refuse((u ? "'" + unit_text + "' is a unit of " + std::string(quantity_name(u->quantity))
                       : "unknown unit '" + unit_text + "'") +
                    "; " + column + " is a " + std::string(quantity_name(*q)) + ": use " +
                    unit_list(*q));
    }
    m.unit = std::string(u->name);
    m.to_si = u->to_si;
  }
  columns_.emplace(column, std::move(m));
  return Status::success();
}

std::string ColumnMap::file_name(std::string_view column) const {
  const auto it = columns_.find(column);
  return it == columns_.end() ? std::string(column) : it->second.file_name;
}

double ColumnMap::to_si(std::string_view column) const {
  const auto it = columns_.find(column);
  return it == columns_.end() ? 1.0 : it->second.to_si;
}

std::string ColumnMap::unit(std::string_view column) const {
  const auto it = columns_.find(column);
  return it == columns_.end() ? std::string() : it->second.unit;
}

bool ColumnMap::renamed(std::string_view column) const {
  return file_name(column) != column;
}

std::string ColumnMap::describe(std::string_view column) const {
  const std::string u = unit(column);
  std::string out = "'" + file_name(column) + "'";
  if (renamed(column)) {
    out += " (" + std::string(column) + (u.empty() ? "" : " in " + u) + ")";
  } else if (!u.empty()) {
    out += " (in " + u + ")";
  }
  return out;
}

std::string limit_message(const std::string& where, const protocol::limits::LimitRefusal& r,
                          std::string_view column, const ColumnMap& map, double value_as_read) {
  const std::string given = map.unit(column);
  if (!given.empty()) {
    return where + ": " + r.text + fmt::format(" (read as {:.6g} {})", value_as_read, given);
  }
  if (r.hint.empty()) return where + ": " + r.text;
  return where + ": " + r.text + ": " + r.hint + "; map it with --column " + std::string(column) +
         "=" + map.file_name(column) + ":" + std::string(r.likely_unit);
}

bool has_mapped_column(const CsvTable& table, const ColumnMap& map, std::string_view column) {
  return table.has_column(map.file_name(column));
}

std::string where_mapped(const CsvTable& table, const ColumnMap& map, std::size_t row,
                         std::string_view column) {
  return table.source_name() + " line " + std::to_string(table.line_number(row)) + ", column " +
         map.describe(column);
}

Status read_si_column(const CsvTable& table, const ColumnMap& map, std::string_view column,
                      std::vector<double>& out) {
  out.clear();
  const std::string name = map.file_name(column);
  const auto index = table.column_index(name);
  if (!index) {
    std::string message = table.source_name() + ": missing column '" + name + "'";
    if (map.renamed(column)) message += " (given for " + std::string(column) + " by --column)";
    message += " (the header has: " + joined(table.header()) + ")";
    message += text::CsvReader::delimiter_note(table.header());
    if (!map.renamed(column)) {
      message += "; map the file's name with --column " + std::string(column) + "=NAME";
      if (const auto q = quantity_of_column(column)) {
        message += "[:UNIT] (UNIT one of " + unit_list(*q) + ")";
      }
    }
    return Status::invalid_input(message);
  }
  const double factor = map.to_si(column);
  out.reserve(table.row_count());
  for (std::size_t r = 0; r < table.row_count(); ++r) {
    std::string why;
    const auto value = parse_number(table.cell(r, *index), &why);
    if (!value) return Status::invalid_input(where_mapped(table, map, r, column) + ": " + why);
    out.push_back(*value * factor);
  }
  return Status::success();
}

std::string column_option_help(const std::vector<std::string>& columns) {
  std::string units;
  for (Quantity q : all_quantities) {
    units += (units.empty() ? "" : "; ") + std::string(quantity_name(q)) + " " + unit_list(q);
  }
  return "map one of lphi's columns (" + joined(columns) +
         ") to the file's column and unit, converted to SI on reading: COLUMN=NAME, "
         "COLUMN=NAME:UNIT or COLUMN:UNIT, e.g. field_t=B:mT (repeatable). Units: " + units;
}

}  // namespace lphi::client
