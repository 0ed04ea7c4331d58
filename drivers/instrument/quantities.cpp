#include "drivers/instrument/quantities.hpp"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <nlohmann/json.hpp>

#include "schema/text/text.hpp"

namespace lphi::drivers {
namespace {

constexpr std::array<std::string_view, quantity_count> names = {
    "x_v", "y_v", "frequency_hz", "range_v", "time_constant_s", "overload",
    "temperature_k", "resistance_ohm", "field_t", "time_s"};

// SCPI-99 returns 9.91E37 for "not a number" and 9.9E37 for an infinite or
// overflowed value (common practice; from memory of the SCPI standard). No
// physical lphi quantity comes near, so anything this large is refused.
constexpr double scpi_overflow_marker = 9.9e37;

using text::trim;

bool iequals(std::string_view a, std::string_view b) {
  return a.size() == b.size() &&
         std::equal(a.begin(), a.end(), b.begin(), [](char x, char y) {
           return std::tolower(static_cast<unsigned char>(x)) ==
                  std::tolower(static_cast<unsigned char>(y));
         });
}

bool usable(double v) { return std::isfinite(v) && std::fabs(v) < scpi_overflow_marker; }

// Stores a field's text as the quantity's value; false when it does not parse.
bool store(const FieldMap& field, Quantity q, std::string_view text, QuantityValues& out) {
  if (is_boolean(q)) {
    const auto b = parse_boolean(text);
    if (!b) return false;
    out[q] = *b ? 1.0 : 0.0;
    return true;
  }
  const auto v = parse_number(text);
  if (!v) return false;
  const double scaled = field.scale * *v;
  if (!usable(scaled)) return false;
  out[q] = scaled;
  return true;
}

}  // namespace

std::optional<Quantity> parse_quantity(std::string_view name) {
  for (std::size_t i = 0; i < names.size(); ++i)
    if (names[i] == name) return static_cast<Quantity>(i);
  return std::nullopt;
}

std::string_view quantity_name(Quantity q) { return names[static_cast<std::size_t>(q)]; }

bool allowed_for(protocol::SourceKind kind, Quantity q) {
  if (q == Quantity::time_s) return true;
  switch (kind) {
    case protocol::SourceKind::lockin:
      return q == Quantity::x_v || q == Quantity::y_v || q == Quantity::frequency_hz ||
             q == Quantity::range_v || q == Quantity::time_constant_s || q == Quantity::overload;
    case protocol::SourceKind::thermometer:
      return q == Quantity::temperature_k || q == Quantity::resistance_ohm;
    case protocol::SourceKind::field:
      return q == Quantity::field_t;
  }
  return false;
}

bool is_boolean(Quantity q) { return q == Quantity::overload; }

std::string allowed_names(protocol::SourceKind kind) {
  std::string out;
  for (std::size_t i = 0; i < names.size(); ++i) {
    if (!allowed_for(kind, static_cast<Quantity>(i))) continue;
    if (!out.empty()) out += ", ";
    out += names[i];
  }
  return out;
}

std::vector<Quantity> required_for(protocol::SourceKind kind) {
  switch (kind) {
    case protocol::SourceKind::lockin: return {Quantity::x_v, Quantity::y_v};
    case protocol::SourceKind::thermometer: return {Quantity::temperature_k};
    case protocol::SourceKind::field: return {Quantity::field_t};
  }
  return {};
}

std::optional<double> parse_number(std::string_view text) {
  const auto value = text::parse_number(text);
  if (!value || !usable(*value)) return std::nullopt;
  return value;
}

std::optional<bool> parse_boolean(std::string_view text) {
  text = trim(text);
  if (iequals(text, "on") || iequals(text, "true")) return true;
  if (iequals(text, "off") || iequals(text, "false")) return false;
  const auto v = parse_number(text);
  if (v && *v == 1.0) return true;
  if (v && *v == 0.0) return false;
  return std::nullopt;
}

std::vector<std::string_view> split_fields(std::string_view line, char delimiter) {
  std::vector<std::string_view> out;
  std::size_t start = 0;
  while (true) {
    const std::size_t end = line.find(delimiter, start);
    if (end == std::string_view::npos) {
      out.push_back(line.substr(start));
      return out;
    }
    out.push_back(line.substr(start, end - start));
    start = end + 1;
  }
}

std::string extract_delimited(const std::vector<FieldMap>& fields, std::string_view line,
                              char delimiter, QuantityValues& out) {
  const auto parts = split_fields(trim(line), delimiter);
  for (const auto& field : fields) {
    const auto q = parse_quantity(field.quantity);
    if (!q) return "unknown quantity '" + field.quantity + "'";
    if (field.index >= parts.size())
      return "field " + std::to_string(field.index) + " (" + field.quantity + ") missing: " +
             std::to_string(parts.size()) + " field(s) in the line";
    if (!store(field, *q, parts[field.index], out))
      return "field " + std::to_string(field.index) + " (" + field.quantity + ") is not a " +
             (is_boolean(*q) ? "boolean" : "finite number") + ": '" +
             std::string(trim(parts[field.index]).substr(0, 40)) + "'";
  }
  return {};
}

std::string extract_json(const std::vector<FieldMap>& fields, std::string_view line,
                         QuantityValues& out) {
  const auto doc = nlohmann::json::parse(line.begin(), line.end(), nullptr, false);
  if (doc.is_discarded()) return "not valid JSON";
  if (!doc.is_object()) return "not a JSON object";
  for (const auto& field : fields) {
    const auto q = parse_quantity(field.quantity);
    if (!q) return "unknown quantity '" + field.quantity + "'";
    const auto it = doc.find(field.key);
    if (it == doc.end()) return "key '" + field.key + "' missing";
    bool ok = false;
    if (is_boolean(*q) && it->is_boolean()) {
      out[*q] = it->get<bool>() ? 1.0 : 0.0;
      ok = true;
    } else if (it->is_number()) {
      const double v = it->get<double>();
      if (is_boolean(*q)) {
        ok = v == 0.0 || v == 1.0;
        if (ok) out[*q] = v;
      } else {
        const double scaled = field.scale * v;
        ok = usable(scaled);
        if (ok) out[*q] = scaled;
      }
    } else if (it->is_string()) {
      ok = store(field, *q, it->get_ref<const std::string&>(), out);
    }
    if (!ok) return "key '" + field.key + "' (" + field.quantity + ") has an unusable value";
  }
  return {};
}

std::optional<Reading> make_reading(protocol::SourceKind kind, const QuantityValues& v,
                                    double arrival_t_s) {
  for (const auto q : required_for(kind))
    if (!v[q]) return std::nullopt;
  const double t = v[Quantity::time_s].value_or(arrival_t_s);
  switch (kind) {
    case protocol::SourceKind::lockin: {
      protocol::LockinReading r;
      r.t = t;
      r.x_v = *v[Quantity::x_v];
      r.y_v = *v[Quantity::y_v];
      r.frequency_hz = v[Quantity::frequency_hz];
      r.range_v = v[Quantity::range_v];
      r.time_constant_s = v[Quantity::time_constant_s];
      if (v[Quantity::overload]) r.overload = *v[Quantity::overload] != 0.0;
      return r;
    }
    case protocol::SourceKind::thermometer: {
      protocol::ThermometerReading r;
      r.t = t;
      r.temperature_k = *v[Quantity::temperature_k];
      r.resistance_ohm = v[Quantity::resistance_ohm];
      return r;
    }
    case protocol::SourceKind::field: {
      protocol::FieldReading r;
      r.t = t;
      r.field_t = *v[Quantity::field_t];
      return r;
    }
  }
  return std::nullopt;
}

std::string check_fields(protocol::SourceKind kind, const std::vector<FieldMap>& fields,
                         bool json, std::string_view where) {
  const std::string at(where);
  std::array<bool, quantity_count> seen{};
  for (std::size_t i = 0; i < fields.size(); ++i) {
    const auto& f = fields[i];
    const std::string here = at + " field " + std::to_string(i + 1);
    const auto q = parse_quantity(f.quantity);
    if (!q) {
      return here + ": unknown quantity '" + f.quantity + "' (" +
             std::string(protocol::kind_name(kind)) + " quantities: " + allowed_names(kind) + ")";
    }
    if (!allowed_for(kind, *q)) {
      return here + ": quantity '" + f.quantity + "' does not belong to a " +
             std::string(protocol::kind_name(kind)) + " (allowed: " + allowed_names(kind) + ")";
    }
    if (seen[static_cast<std::size_t>(*q)]) return here + ": quantity '" + f.quantity + "' mapped twice";
    seen[static_cast<std::size_t>(*q)] = true;
    if (!std::isfinite(f.scale) || f.scale == 0.0)
      return here + ": scale must be a finite, non-zero number";
    if (json && f.key.empty()) return here + ": a JSON field needs a key";
  }
  return {};
}

}  // namespace lphi::drivers
