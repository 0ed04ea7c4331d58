// The refusal texts of limits.hpp, built from its constants.
#include "schema/protocol/limits.hpp"

#include <array>

#include <fmt/format.h>

namespace lphi::protocol::limits {

namespace {

struct Scale {
  std::string_view unit;
  double to_si;
};

// The first of `scales` that brings |value| within `bound`, as the likely
// unit; SI prefixes and 1 G = 1e-4 T from the SI Brochure (9th ed., tables 7
// and 8 and section 4, non-SI units).
template <std::size_t N>
void add_hint(LimitRefusal& r, double value, double bound, std::string_view si_unit,
              const std::array<Scale, N>& scales) {
  if (!std::isfinite(value)) return;
  for (const auto& s : scales) {
    const double si = value * s.to_si;
    if (std::abs(si) < bound) {
      r.likely_unit = s.unit;
      r.hint = fmt::format("is it in {}? {:.6g} {} would be {:.6g} {}", s.unit, value, s.unit, si,
                           si_unit);
      return;
    }
  }
}

}  // namespace

std::optional<LimitRefusal> field_refusal(double field_t) {
  if (field_in_range(field_t)) return std::nullopt;
  LimitRefusal r;
  r.text = fmt::format("{:.6g} T is beyond the {:g} T lphi accepts in magnitude", field_t,
                       max_abs_field_t);
  add_hint(r, field_t, max_abs_field_t, "T", std::array<Scale, 2>{{{"mT", 1e-3}, {"G", 1e-4}}});
  return r;
}

std::optional<LimitRefusal> temperature_refusal(double temperature_k) {
  if (temperature_in_range(temperature_k)) return std::nullopt;
  LimitRefusal r;
  r.text = fmt::format("{:.6g} K is outside ({:g}, {:g}) K", temperature_k, min_temperature_k,
                       max_temperature_k);
  if (temperature_k >= max_temperature_k) {
    add_hint(r, temperature_k, max_temperature_k, "K", std::array<Scale, 1>{{{"mK", 1e-3}}});
  }
  return r;
}

}  // namespace lphi::protocol::limits
