// The file-level unit checks of the tables that `lphi fit` and `lphi
// dephasing` read: what each command's table holds (its lphi column names,
// for --column) and the values that betray a unit mistake, decided here
// where the file is known, with a hint naming the column and the unit.
//
// What is refused: a field beyond schema/protocol/limits.hpp (|B| > 30 T:
// the largest |value| of the column is named, "45 T ... is it in mT? ...
// map it with --column field_t=B:mT"), a temperature beyond its limit, an
// L_phi or its error of a millimetre or more ("is it in nm or um?"). What
// is only flagged (a warning line, the fit goes on): a sheet resistance of
// h/e^2 or more read in a unit the user gave (kohm, Mohm), which may be a
// column already in ohm. lphi never rescales a column the user did not map:
// a resistance in the millions without a stated unit is taken as ohm.
// The plausibility of the fitted alpha and L_phi is the sweep analysis's.
//
// Pure functions of their arguments; `warn` receives warning lines.
#pragma once

#include <ostream>
#include <string>
#include <string_view>
#include <vector>

#include "daemon/client/column_map.hpp"
#include "daemon/client/csv_table.hpp"
#include "analysis/constants.hpp"
#include "schema/status.hpp"

namespace lphi::client {

// lphi's columns of a sweep table: field_t, one signal column, and the
// optional time of each reading and lock-in time constant.
const std::vector<std::string>& fit_columns();
// lphi's columns of an L_phi(T) table.
const std::vector<std::string>& dephasing_columns();

// field_t and the signal (both already in SI, row by row as in table);
// `squares` turns an r_ohm signal into R_sq (1 for rsq_ohm).
Status check_sweep_units(const CsvTable& table, const ColumnMap& map,
                         const std::vector<double>& field_t, std::string_view signal_column,
                         const std::vector<double>& signal, double squares, std::ostream& warn);

// A length beyond this is no phase-coherence length: the longest reported
// ones are tens of micrometres in the cleanest semiconductor
// heterostructures (common practice, from memory), so a millimetre leaves
// a wide margin and still catches nm or um written as m.
inline constexpr double max_plausible_lphi_m = 1e-3;
// A sheet resistance read in a stated unit at or above R_K = h/e^2 = 25.8
// kohm (analysis/PHYSICS.md, "Constants and units") is flagged: the sheet
// conductance is then one e^2/h or less, where the weak-localization
// correction, perturbative in 1/g with g the sheet conductance in units of
// e^2/h (analysis/PHYSICS.md, "2D weak localization (HLN)", validity), no
// longer holds. A kohm column that was in ohm is read 1000 times too large,
// so a film of 26 ohm or more shows here.

Status check_dephasing_units(const CsvTable& table, const ColumnMap& map,
                             const std::vector<double>& temperature_k,
                             const std::vector<double>& lphi_m,
                             const std::vector<double>& lphi_err_m);

}  // namespace lphi::client
