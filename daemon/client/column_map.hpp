// Column mappings with units: how a column of the user's file becomes a
// quantity that lphi reads, for `lphi fit`, `lphi dephasing`, `lphi replay`
// and `lphi send` (their --column option).
//
// lphi's own column names carry their SI unit as a suffix (field_t,
// rsq_ohm, temperature_k, lockin_x_v, lphi_m, time_s; DEVELOPERS.md, "Units
// in names"). A mapping is one --column argument:
//   COLUMN=NAME        the file calls lphi's COLUMN "NAME"; values in SI
//   COLUMN=NAME:UNIT   ... and writes them in UNIT; converted on reading
//   COLUMN:UNIT        the file uses lphi's name, in UNIT
// e.g. `--column field_t=B:mT --column rsq_ohm=R:kohm`. UNIT must measure
// what COLUMN's suffix says (the unit table below); an unknown COLUMN or
// UNIT, a unit of another quantity, or a COLUMN mapped twice is refused
// naming it and listing what is accepted. Nothing is ever converted
// without the user saying so: lphi does not guess units from the numbers,
// it only refuses numbers beyond the reading limits with a hint
// (limit_message).
//
// Plain values, no state beyond the map itself; a ColumnMap is safe to read
// from several threads once built.
#pragma once

#include <cstddef>
#include <map>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "daemon/client/csv_table.hpp"
#include "schema/protocol/limits.hpp"
#include "schema/status.hpp"

namespace lphi::client {

// What a unit measures.
enum class Quantity { field, resistance, temperature, voltage, length, time };

// One accepted unit: its name as typed, what it measures, and the factor
// that takes a value in it to the SI unit (value_si = value * to_si).
struct Unit {
  std::string_view name;
  Quantity quantity;
  double to_si;
};

// Every unit lphi converts: T, mT, uT, G; ohm, kohm, Mohm; K, mK; V, mV,
// uV; m, um, nm; s, ms, min. "u" may also be written as the micro sign.
// The factors are SI prefixes (SI Brochure, 9th ed., table 7), 1 G = 1e-4 T
// and 1 min = 60 s (same brochure, tables 8 and section 4).
const std::vector<Unit>& unit_table();
// The unit called `name` (case matters: mT is not MT), or nothing.
std::optional<Unit> find_unit(std::string_view name);
// "field", "resistance", ...
std::string_view quantity_name(Quantity q);
// "T", "ohm", "K", "V", "m", "s".
std::string_view si_unit(Quantity q);
// "T, mT, uT, G": the accepted units of q, for messages and --help.
std::string unit_list(Quantity q);
// What lphi's column measures, from its suffix (_t, _ohm, _k, _v, _m, _s;
// the protocol's bare time key "t" is seconds); nothing for a column
// without a unit (seq, lockin_overload, frequency_hz, ...).
std::optional<Quantity> quantity_of_column(std::string_view column);

// Where lphi's column is found in a file, and its unit there.
struct MappedColumn {
  std::string file_name;   // the file's name for the column
  std::string unit;        // as given, empty: lphi's SI unit
  double to_si = 1.0;
};

class ColumnMap {
 public:
  // Adds one --column argument. `columns` are lphi's columns the command
  // reads; `what` ends the refusal of another name ("a recording" in "'x'
  // is not a column of a recording").
  Status add(std::string_view mapping, const std::vector<std::string>& columns,
             std::string_view what);

  bool empty() const { return columns_.empty(); }
  // The file's name for lphi's column: the mapped one, else the column's own.
  std::string file_name(std::string_view column) const;
  // The factor to SI of the column's values (1 when no unit was given).
  double to_si(std::string_view column) const;
  // The unit given for the column, or empty.
  std::string unit(std::string_view column) const;
  bool renamed(std::string_view column) const;
  // How a message names the column: "'B' (field_t in mT)", "'B' (field_t)",
  // "'field_t' (in mT)" or "'field_t'".
  std::string describe(std::string_view column) const;

 private:
  std::map<std::string, MappedColumn, std::less<>> columns_;
};

// The message for a value of lphi's `column` beyond a reading limit (the
// refusal r of schema/protocol/limits.hpp), after `where` (the file, line and
// column). Without a unit from the map it adds the refusal's hint and how to
// map the column in the likely unit ("...: is it in mT? 45 mT would be
// 0.045 T; map it with --column field_t=B:mT"); with a unit it says what
// was read ("(read as 45000 mT)").
std::string limit_message(const std::string& where, const protocol::limits::LimitRefusal& r,
                          std::string_view column, const ColumnMap& map, double value_as_read);

// All values of lphi's `column` from table, found through map and converted
// to SI. Errors name the file, the line and the column as the file calls it.
// A missing column lists the header and, when the header is one cell split
// by another delimiter, says so.
Status read_si_column(const CsvTable& table, const ColumnMap& map, std::string_view column,
                      std::vector<double>& out);
// Whether table has lphi's column under its mapped name.
bool has_mapped_column(const CsvTable& table, const ColumnMap& map, std::string_view column);
// "sweep.csv line 3, column 'B' (field_t in mT)".
std::string where_mapped(const CsvTable& table, const ColumnMap& map, std::size_t row,
                         std::string_view column);

// The --column option's help, for commands whose columns are `columns`.
std::string column_option_help(const std::vector<std::string>& columns);

}  // namespace lphi::client
