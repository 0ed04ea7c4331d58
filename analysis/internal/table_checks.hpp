// Input checks shared by the fits of tables over temperature (the L_phi(T)
// fit in dephasing.cpp and the zero-field thermometry in thermometry.cpp).
// Each returns an empty string when the input is usable, else a message
// naming the option or the point (by index) and what is wrong with it.
// Internal to lphi_analysis.
#pragma once

#include <cstddef>
#include <string>

namespace lphi::detail {

// "point I: WHAT"
std::string point_error(std::size_t i, const char* what);

// The options every table fit has: at least min_points points (>= 4: three
// parameters and one degree of freedom), a span T_max/T_min of at least
// min_span_ratio (>= 1), a significance level in (0, 1), and an iteration
// limit of at least 1.
std::string check_table_options(std::size_t min_points, double min_span_ratio, double significance,
                                int max_iterations);

// Point i of a table: temperature finite and > 0, value finite (and > 0 when
// value_positive), error finite and >= 0 (0: unknown). `value` and `error`
// name the columns in the messages.
std::string check_table_point(std::size_t i, double temperature_k, const char* value, double v,
                              bool value_positive, const char* error, double e);

// Either every point has an error or none has (0 means unknown).
std::string check_errors_all_or_none(std::size_t with_error, std::size_t n, const char* error);

}  // namespace lphi::detail
