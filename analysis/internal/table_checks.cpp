#include "analysis/internal/table_checks.hpp"

#include <cmath>
#include <string>

namespace lphi::detail {

std::string point_error(std::size_t i, const char* what) {
  return "point " + std::to_string(i) + ": " + what;
}

std::string check_table_options(std::size_t min_points, double min_span_ratio, double significance,
                                int max_iterations) {
  if (min_points < 4) return "options.min_points must be at least 4 (three parameters and one degree of freedom)";
  if (!(min_span_ratio >= 1.0) || !std::isfinite(min_span_ratio))
    return "options.min_span_ratio must be a finite number >= 1";
  if (!(significance > 0.0 && significance < 1.0))
    return "options.significance must lie strictly between 0 and 1";
  if (max_iterations < 1) return "options.max_iterations must be at least 1";
  return {};
}

std::string check_table_point(std::size_t i, double temperature_k, const char* value, double v,
                              bool value_positive, const char* error, double e) {
  const auto bad = [i](const std::string& what) { return point_error(i, what.c_str()); };
  if (!std::isfinite(temperature_k)) return bad("temperature_k is not finite");
  if (!(temperature_k > 0.0)) return bad("temperature_k must be > 0");
  if (!std::isfinite(v)) return bad(std::string(value) + " is not finite");
  if (value_positive && !(v > 0.0)) return bad(std::string(value) + " must be > 0");
  if (!std::isfinite(e)) return bad(std::string(error) + " is not finite");
  if (e < 0.0) return bad(std::string(error) + " must be >= 0 (0: unknown)");
  return {};
}

std::string check_errors_all_or_none(std::size_t with_error, std::size_t n, const char* error) {
  if (with_error != 0 && with_error != n)
    return std::string(error) + " is 0 (unknown) at some points but given at others; give all or none";
  return {};
}

}  // namespace lphi::detail
