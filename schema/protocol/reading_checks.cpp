// The checks of single readings of a batch: keys, types, finiteness, physical
// ranges and seq; the read_readings of codec.hpp, apart from the rest of the
// codec because it is the one place that knows which keys each kind carries.
#include "schema/protocol/codec.hpp"

#include "schema/protocol/codec_detail.hpp"
#include "schema/protocol/limits.hpp"

#include <array>
#include <cmath>

namespace lphi::protocol {

using nlohmann::json;
using detail::refuse;
using detail::type_name;

namespace {

// The keys a reading may carry. `owner` is the kind the key belongs to, or
// nothing for keys common to every kind.
enum class Slot { seq, t, x_v, y_v, frequency_hz, range_v, time_constant_s, overload,
                  temperature_k, resistance_ohm, field_t };
constexpr std::size_t slot_count = 11;
struct KeySpec {
  std::string_view key;
  Slot slot;
  std::optional<SourceKind> owner;
  bool required;
};
constexpr std::array<KeySpec, slot_count> key_specs = {{
    {"seq", Slot::seq, std::nullopt, true},
    {"t", Slot::t, std::nullopt, true},
    {"x_v", Slot::x_v, SourceKind::lockin, true},
    {"y_v", Slot::y_v, SourceKind::lockin, true},
    {"frequency_hz", Slot::frequency_hz, SourceKind::lockin, false},
    {"range_v", Slot::range_v, SourceKind::lockin, false},
    {"time_constant_s", Slot::time_constant_s, SourceKind::lockin, false},
    {"overload", Slot::overload, SourceKind::lockin, false},
    {"temperature_k", Slot::temperature_k, SourceKind::thermometer, true},
    {"resistance_ohm", Slot::resistance_ohm, SourceKind::thermometer, false},
    {"field_t", Slot::field_t, SourceKind::field, true},
}};

const KeySpec* find_key(std::string_view key) {
  for (const auto& spec : key_specs) {
    if (spec.key == key) return &spec;
  }
  return nullptr;
}

struct Fields {
  std::array<bool, slot_count> present{};
  std::array<double, slot_count> value{};
  std::int64_t seq = 0;
  bool overload = false;
  bool has(Slot s) const { return present[static_cast<std::size_t>(s)]; }
  double get(Slot s) const { return value[static_cast<std::size_t>(s)]; }
  std::optional<double> optional(Slot s) const {
    return has(s) ? std::optional<double>(get(s)) : std::nullopt;
  }
};

using limits::max_seq;

std::optional<Refusal> read_fields(const json& reading, SourceKind kind, Fields& f) {
  if (!reading.is_object()) {
    return refuse(Reason::not_an_object, "a reading must be a map, not " + type_name(reading));
  }
  for (auto it = reading.begin(); it != reading.end(); ++it) {
    const std::string& key = it.key();
    const KeySpec* spec = find_key(key);
    if (spec == nullptr) {
      if (!is_valid_utf8(key)) return refuse(Reason::unknown_field, "a key that is not UTF-8");
      return refuse(Reason::unknown_field,
                    "unknown key \"" + key.substr(0, 64) + "\" in a " +
                        std::string(kind_name(kind)) + " reading");
    }
    if (spec->owner && *spec->owner != kind) {
      return refuse(Reason::wrong_kind, "key \"" + key + "\" belongs to " +
                                            std::string(kind_name(*spec->owner)) +
                                            " readings, the source is a " +
                                            std::string(kind_name(kind)));
    }
    const json& v = *it;
    const auto i = static_cast<std::size_t>(spec->slot);
    if (spec->slot == Slot::seq) {
      if (v.is_number_unsigned()) {
        const auto u = v.get<std::uint64_t>();
        if (u > static_cast<std::uint64_t>(max_seq)) {
          return refuse(Reason::bad_seq, "seq is larger than 2^53");
        }
        f.seq = static_cast<std::int64_t>(u);
      } else if (v.is_number_integer()) {
        f.seq = v.get<std::int64_t>();
        if (f.seq < 0) return refuse(Reason::bad_seq, "seq is negative");
      } else {
        return refuse(Reason::wrong_type, "seq must be an integer, not " + type_name(v));
      }
    } else if (spec->slot == Slot::overload) {
      if (!v.is_boolean()) {
        return refuse(Reason::wrong_type, "overload must be true or false, not " + type_name(v));
      }
      f.overload = v.get<bool>();
    } else {
      if (!v.is_number()) {
        return refuse(Reason::wrong_type, key + " must be a number, not " + type_name(v));
      }
      f.value[i] = v.get<double>();
      if (!std::isfinite(f.value[i])) return refuse(Reason::not_finite, key + " is not finite");
    }
    f.present[i] = true;
  }
  for (const auto& spec : key_specs) {
    if (spec.required && (!spec.owner || *spec.owner == kind) && !f.has(spec.slot)) {
      return refuse(Reason::missing_field, "the reading has no \"" + std::string(spec.key) + "\"");
    }
  }
  if (!(f.get(Slot::t) > 0.0)) {
    return refuse(Reason::time_out_of_range, "t must be positive seconds since the Unix epoch");
  }
  auto positive = [&](Slot s, std::string_view name) -> std::optional<Refusal> {
    if (f.has(s) && !(f.get(s) > 0.0)) {
      return refuse(Reason::value_out_of_range, std::string(name) + " must be positive");
    }
    return std::nullopt;
  };
  switch (kind) {
    case SourceKind::lockin:
      if (auto r = positive(Slot::frequency_hz, "frequency_hz")) return r;
      if (auto r = positive(Slot::range_v, "range_v")) return r;
      if (auto r = positive(Slot::time_constant_s, "time_constant_s")) return r;
      break;
    case SourceKind::thermometer: {
      if (auto r = limits::temperature_refusal(f.get(Slot::temperature_k))) {
        return refuse(Reason::temperature_out_of_range,
                      "temperature_k = " + r->with_hint() +
                          (r->hint.empty() ? "" : " (temperature_k is in kelvin)"));
      }
      if (auto r = positive(Slot::resistance_ohm, "resistance_ohm")) return r;
      break;
    }
    case SourceKind::field:
      if (auto r = limits::field_refusal(f.get(Slot::field_t))) {
        return refuse(Reason::field_out_of_range,
                      "field_t = " + r->with_hint() +
                          (r->hint.empty() ? "" : " (field_t is in tesla)"));
      }
      break;
  }
  return std::nullopt;
}

}  // namespace

void read_readings(const json& readings, SourceKind kind, Readings& accepted,
                   std::vector<RejectedReading>& rejected) {
  std::optional<std::int64_t> previous_seq;
  std::size_t index = 0;
  for (const auto& reading : readings) {
    Fields f;
    auto refusal = read_fields(reading, kind, f);
    if (!refusal && previous_seq && f.seq <= *previous_seq) {
      refusal = Refusal{Reason::seq_not_increasing,
                        "seq " + std::to_string(f.seq) + " follows seq " +
                            std::to_string(*previous_seq) + " in the same batch"};
    }
    if (refusal) {
      RejectedReading r;
      r.index = index;
      if (f.has(Slot::seq)) r.seq = f.seq;
      r.reason = refusal->reason;
      r.detail = std::move(refusal->detail);
      rejected.push_back(std::move(r));
    } else {
      previous_seq = f.seq;
      switch (kind) {
        case SourceKind::lockin: {
          LockinReading r{f.seq, f.get(Slot::t), f.get(Slot::x_v), f.get(Slot::y_v),
                          f.optional(Slot::frequency_hz), f.optional(Slot::range_v),
                          f.optional(Slot::time_constant_s),
                          f.has(Slot::overload) ? std::optional<bool>(f.overload) : std::nullopt};
          std::get<std::vector<LockinReading>>(accepted).push_back(r);
          break;
        }
        case SourceKind::thermometer:
          std::get<std::vector<ThermometerReading>>(accepted).push_back(
              {f.seq, f.get(Slot::t), f.get(Slot::temperature_k), f.optional(Slot::resistance_ohm)});
          break;
        case SourceKind::field:
          std::get<std::vector<FieldReading>>(accepted).push_back(
              {f.seq, f.get(Slot::t), f.get(Slot::field_t)});
          break;
      }
    }
    ++index;
  }
}

}  // namespace lphi::protocol
