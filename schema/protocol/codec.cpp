#include "schema/protocol/codec.hpp"

#include "schema/protocol/limits.hpp"

#include <array>
#include <cmath>
#include <limits>

namespace lphi::protocol {

using nlohmann::json;

namespace {

constexpr std::size_t max_msgpack_depth = 32;

std::optional<Refusal> refuse(Reason reason, std::string detail) {
  return Refusal{reason, std::move(detail)};
}

std::uint64_t read_be(const unsigned char* p, std::size_t n) {
  std::uint64_t v = 0;
  for (std::size_t i = 0; i < n; ++i) v = (v << 8) | p[i];
  return v;
}

// Walks MessagePack without recursion and checks that it is complete, has no
// trailing bytes and nests at most max_msgpack_depth deep. nlohmann's reader
// recurses once per nesting level, so a hostile frame of nested arrays would
// otherwise exhaust the stack.
std::optional<std::string> check_msgpack_shape(std::string_view frame) {
  const auto* data = reinterpret_cast<const unsigned char*>(frame.data());
  const std::size_t size = frame.size();
  std::size_t pos = 0;
  std::vector<std::uint64_t> pending{1};
  auto need = [&](std::size_t n) { return size - pos >= n; };
  while (!pending.empty()) {
    if (pending.back() == 0) {
      pending.pop_back();
      continue;
    }
    --pending.back();
    if (!need(1)) return "truncated MessagePack";
    const unsigned char b = data[pos++];
    std::uint64_t skip = 0;       // payload bytes after the header
    std::uint64_t children = 0;   // items inside a container
    bool container = false;
    auto sized = [&](std::size_t len_bytes, std::size_t extra) -> bool {
      if (!need(len_bytes)) return false;
      skip = read_be(data + pos, len_bytes) + extra;
      pos += len_bytes;
      return true;
    };
    auto counted = [&](std::size_t len_bytes, std::uint64_t per_entry) -> bool {
      if (!need(len_bytes)) return false;
      children = read_be(data + pos, len_bytes) * per_entry;
      pos += len_bytes;
      container = true;
      return true;
    };
    bool ok = true;
    if (b <= 0x7f || b >= 0xe0 || b == 0xc0 || b == 0xc2 || b == 0xc3) {
    } else if (b >= 0x80 && b <= 0x8f) {
      children = std::uint64_t{b & 0x0fu} * 2;
      container = true;
    } else if (b >= 0x90 && b <= 0x9f) {
      children = b & 0x0fu;
      container = true;
    } else if (b >= 0xa0 && b <= 0xbf) {
      skip = b & 0x1fu;
    } else {
      switch (b) {
        case 0xc4: ok = sized(1, 0); break;
        case 0xc5: ok = sized(2, 0); break;
        case 0xc6: ok = sized(4, 0); break;
        case 0xc7: ok = sized(1, 1); break;
        case 0xc8: ok = sized(2, 1); break;
        case 0xc9: ok = sized(4, 1); break;
        case 0xca: skip = 4; break;
        case 0xcb: skip = 8; break;
        case 0xcc: case 0xd0: skip = 1; break;
        case 0xcd: case 0xd1: skip = 2; break;
        case 0xce: case 0xd2: skip = 4; break;
        case 0xcf: case 0xd3: skip = 8; break;
        case 0xd4: skip = 2; break;
        case 0xd5: skip = 3; break;
        case 0xd6: skip = 5; break;
        case 0xd7: skip = 9; break;
        case 0xd8: skip = 17; break;
        case 0xd9: ok = sized(1, 0); break;
        case 0xda: ok = sized(2, 0); break;
        case 0xdb: ok = sized(4, 0); break;
        case 0xdc: ok = counted(2, 1); break;
        case 0xdd: ok = counted(4, 1); break;
        case 0xde: ok = counted(2, 2); break;
        case 0xdf: ok = counted(4, 2); break;
        default: return "byte 0xc1 is not MessagePack";
      }
    }
    if (!ok || skip > size - pos) return "truncated MessagePack";
    pos += skip;
    if (container && children > 0) {
      // Every item takes at least one byte: a count beyond the frame is a lie.
      if (children > size - pos) return "truncated MessagePack (a container claims more items than the frame holds)";
      if (pending.size() > max_msgpack_depth) return "MessagePack nested deeper than 32 levels";
      pending.push_back(children);
    }
  }
  if (pos != size) return "trailing bytes after the MessagePack message";
  return std::nullopt;
}

std::string type_name(const json& v) { return v.type_name(); }

std::optional<Refusal> read_source_name(const json& message, const Limits& limits,
                                        std::string& out) {
  auto it = message.find("source");
  if (it == message.end()) return refuse(Reason::missing_field, "the message has no \"source\"");
  if (!it->is_string()) {
    return refuse(Reason::wrong_type, "\"source\" must be a string, not " + type_name(*it));
  }
  const auto& name = it->get_ref<const std::string&>();
  if (auto bad = check_name(name, limits)) return bad;
  out = name;
  return std::nullopt;
}

std::optional<Refusal> read_batch_id(const json& message, std::optional<std::uint64_t>& out) {
  auto it = message.find("batch");
  if (it == message.end()) return std::nullopt;
  if (it->is_number_unsigned()) {
    out = it->get<std::uint64_t>();
    return std::nullopt;
  }
  if (it->is_number_integer() && it->get<std::int64_t>() >= 0) {
    out = static_cast<std::uint64_t>(it->get<std::int64_t>());
    return std::nullopt;
  }
  return refuse(Reason::wrong_type, "\"batch\" must be a non-negative integer");
}

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
      const double temperature_k = f.get(Slot::temperature_k);
      if (!limits::temperature_in_range(temperature_k)) {
        return refuse(Reason::temperature_out_of_range,
                      "temperature_k must lie between 0 and 1000 K");
      }
      if (auto r = positive(Slot::resistance_ohm, "resistance_ohm")) return r;
      break;
    }
    case SourceKind::field:
      if (!limits::field_in_range(f.get(Slot::field_t))) {
        return refuse(Reason::field_out_of_range, "|field_t| must be below 50 T");
      }
      break;
  }
  return std::nullopt;
}

}  // namespace

std::string_view encoding_name(Encoding encoding) {
  return encoding == Encoding::json ? "json" : "msgpack";
}

std::optional<Encoding> parse_encoding(std::string_view name) {
  if (name == "json") return Encoding::json;
  if (name == "msgpack") return Encoding::msgpack;
  return std::nullopt;
}

bool is_valid_utf8(std::string_view text) {
  const auto* s = reinterpret_cast<const unsigned char*>(text.data());
  const std::size_t n = text.size();
  std::size_t i = 0;
  while (i < n) {
    const unsigned char c = s[i];
    std::size_t len = 0;
    std::uint32_t cp = 0;
    if (c < 0x80) {
      ++i;
      continue;
    } else if ((c & 0xe0) == 0xc0) {
      len = 2;
      cp = c & 0x1fu;
    } else if ((c & 0xf0) == 0xe0) {
      len = 3;
      cp = c & 0x0fu;
    } else if ((c & 0xf8) == 0xf0) {
      len = 4;
      cp = c & 0x07u;
    } else {
      return false;
    }
    if (n - i < len) return false;
    for (std::size_t k = 1; k < len; ++k) {
      if ((s[i + k] & 0xc0) != 0x80) return false;
      cp = (cp << 6) | (s[i + k] & 0x3fu);
    }
    const std::uint32_t min_cp = len == 2 ? 0x80 : len == 3 ? 0x800 : 0x10000;
    if (cp < min_cp || cp > 0x10ffff || (cp >= 0xd800 && cp <= 0xdfff)) return false;
    i += len;
  }
  return true;
}

std::optional<Refusal> check_name(std::string_view name, const Limits& limits) {
  if (name.empty()) return refuse(Reason::bad_name, "a name must not be empty");
  if (name.size() > limits.max_name_bytes) {
    return refuse(Reason::bad_name,
                  "a name must be at most " + std::to_string(limits.max_name_bytes) + " bytes");
  }
  if (!is_valid_utf8(name)) return refuse(Reason::bad_name, "a name must be valid UTF-8");
  for (const char c : name) {
    const auto u = static_cast<unsigned char>(c);
    if (u < 0x20 || u == 0x7f) {
      return refuse(Reason::bad_name, "a name must not contain control characters");
    }
  }
  return std::nullopt;
}

std::optional<Refusal> decode_frame(std::string_view frame, const Limits& limits, json& out,
                                    Encoding& encoding) {
  std::size_t first = 0;
  while (first < frame.size() &&
         (frame[first] == ' ' || frame[first] == '\t' || frame[first] == '\r' || frame[first] == '\n')) {
    ++first;
  }
  encoding = (first < frame.size() && (frame[first] == '{' || frame[first] == '['))
                 ? Encoding::json
                 : Encoding::msgpack;
  if (frame.size() > limits.max_frame_bytes) {
    return refuse(Reason::frame_too_large,
                  "the frame holds " + std::to_string(frame.size()) + " bytes, the limit is " +
                      std::to_string(limits.max_frame_bytes));
  }
  if (frame.empty()) return refuse(Reason::bad_encoding, "the frame is empty");
  if (encoding == Encoding::json) {
    out = json::parse(frame.begin(), frame.end(), nullptr, /*allow_exceptions=*/false);
    if (out.is_discarded()) return refuse(Reason::bad_encoding, "the frame is not valid JSON");
  } else {
    if (auto why = check_msgpack_shape(frame)) return refuse(Reason::bad_encoding, *why);
    out = json::from_msgpack(frame.begin(), frame.end(), /*strict=*/true,
                             /*allow_exceptions=*/false);
    if (out.is_discarded()) return refuse(Reason::bad_encoding, "the frame is not valid MessagePack");
  }
  if (!out.is_object()) {
    return refuse(Reason::not_an_object, "a message must be a map, not " + type_name(out));
  }
  return std::nullopt;
}

std::string encode_frame(const json& message, Encoding encoding) {
  if (encoding == Encoding::json) {
    return message.dump(-1, ' ', false, json::error_handler_t::replace);
  }
  std::string out;
  json::to_msgpack(message, nlohmann::detail::output_adapter<char>(out));
  return out;
}

std::optional<Refusal> read_request_type(const json& message, RequestType& type) {
  auto it = message.find("type");
  if (it == message.end()) return refuse(Reason::missing_field, "the message has no \"type\"");
  if (!it->is_string()) return refuse(Reason::wrong_type, "\"type\" must be a string");
  const auto& name = it->get_ref<const std::string&>();
  if (name == "batch") {
    type = RequestType::batch;
  } else if (name == "hello") {
    type = RequestType::hello;
  } else {
    return refuse(Reason::unknown_type, "unknown message type (expected \"batch\" or \"hello\")");
  }
  return std::nullopt;
}

std::optional<Refusal> read_hello(const json& message, const Limits& limits, HelloRequest& out) {
  for (auto it = message.begin(); it != message.end(); ++it) {
    if (it.key() != "type" && it.key() != "source") {
      return refuse(Reason::unknown_field, "a hello carries only \"type\" and \"source\"");
    }
  }
  return read_source_name(message, limits, out.source);
}

std::optional<Refusal> read_batch_header(const json& message, const Limits& limits,
                                         BatchHeader& out) {
  for (auto it = message.begin(); it != message.end(); ++it) {
    const auto& key = it.key();
    if (key != "type" && key != "batch" && key != "source" && key != "kind" && key != "readings") {
      return refuse(Reason::unknown_field, "a batch carries only type, batch, source, kind, readings");
    }
  }
  if (auto r = read_batch_id(message, out.batch_id)) return r;
  if (auto r = read_source_name(message, limits, out.source)) return r;
  if (auto it = message.find("kind"); it != message.end()) {
    if (!it->is_string()) return refuse(Reason::wrong_type, "\"kind\" must be a string");
    out.kind = parse_kind(it->get_ref<const std::string&>());
    if (!out.kind) return refuse(Reason::wrong_kind, "\"kind\" must be lockin, thermometer or field");
  }
  auto it = message.find("readings");
  if (it == message.end()) return refuse(Reason::missing_field, "the batch has no \"readings\"");
  if (!it->is_array()) {
    return refuse(Reason::wrong_type, "\"readings\" must be an array, not " + type_name(*it));
  }
  if (it->empty()) return refuse(Reason::empty_batch, "the batch has no readings");
  if (it->size() > limits.max_batch_readings) {
    return refuse(Reason::batch_too_large,
                  "the batch holds " + std::to_string(it->size()) + " readings, the limit is " +
                      std::to_string(limits.max_batch_readings));
  }
  out.readings = &*it;
  return std::nullopt;
}

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

json reading_to_json(const LockinReading& r) {
  json j = {{"seq", r.seq}, {"t", r.t}, {"x_v", r.x_v}, {"y_v", r.y_v}};
  if (r.frequency_hz) j["frequency_hz"] = *r.frequency_hz;
  if (r.range_v) j["range_v"] = *r.range_v;
  if (r.time_constant_s) j["time_constant_s"] = *r.time_constant_s;
  if (r.overload) j["overload"] = *r.overload;
  return j;
}

json reading_to_json(const ThermometerReading& r) {
  json j = {{"seq", r.seq}, {"t", r.t}, {"temperature_k", r.temperature_k}};
  if (r.resistance_ohm) j["resistance_ohm"] = *r.resistance_ohm;
  return j;
}

json reading_to_json(const FieldReading& r) {
  return {{"seq", r.seq}, {"t", r.t}, {"field_t", r.field_t}};
}

json hello_message(std::string_view source) {
  return {{"type", "hello"}, {"source", source}};
}

json batch_message(std::uint64_t batch_id, std::string_view source, const Readings& readings) {
  json array = json::array();
  std::visit(
      [&](const auto& v) {
        array.get_ref<json::array_t&>().reserve(v.size());
        for (const auto& r : v) array.push_back(reading_to_json(r));
      },
      readings);
  return {{"type", "batch"},
          {"batch", batch_id},
          {"source", source},
          {"kind", kind_name(kind_of(readings))},
          {"readings", std::move(array)}};
}

json ack_message(const Ack& ack) {
  json j = {{"type", "ack"},
            {"source", ack.source},
            {"accepted", ack.accepted},
            {"duplicates", ack.duplicates}};
  if (ack.batch_id) j["batch"] = *ack.batch_id;
  j["durable_through"] = ack.durable_through ? json(*ack.durable_through) : json(nullptr);
  json rejected = json::array();
  for (const auto& r : ack.rejected) {
    json e = {{"index", r.index}, {"reason", reason_name(r.reason)}, {"detail", r.detail}};
    e["seq"] = r.seq ? json(*r.seq) : json(nullptr);
    rejected.push_back(std::move(e));
  }
  j["rejected"] = std::move(rejected);
  return j;
}

json error_message(const ErrorReply& error) {
  json j = {{"type", "error"},
            {"reason", reason_name(error.reason)},
            {"detail", error.detail},
            {"retryable", is_retryable(error.reason)}};
  j["batch"] = error.batch_id ? json(*error.batch_id) : json(nullptr);
  return j;
}

json hello_reply_message(const HelloReply& hello) {
  return {{"type", "hello"},
          {"source", hello.source},
          {"kind", kind_name(hello.kind)},
          {"next_seq", hello.next_seq}};
}

std::optional<Refusal> read_reply(const json& message, Reply& out) {
  try {
    const auto& type = message.at("type").get_ref<const std::string&>();
    auto batch_id = [&]() -> std::optional<std::uint64_t> {
      auto it = message.find("batch");
      if (it == message.end() || it->is_null()) return std::nullopt;
      return it->get<std::uint64_t>();
    };
    if (type == "ack") {
      out.type = ReplyType::ack;
      out.ack = Ack{};
      out.ack.batch_id = batch_id();
      out.ack.source = message.at("source").get<std::string>();
      const auto& through = message.at("durable_through");
      if (!through.is_null()) out.ack.durable_through = through.get<std::int64_t>();
      out.ack.accepted = message.at("accepted").get<std::uint64_t>();
      out.ack.duplicates = message.at("duplicates").get<std::uint64_t>();
      for (const auto& e : message.at("rejected")) {
        RejectedReading r;
        r.index = e.at("index").get<std::size_t>();
        if (!e.at("seq").is_null()) r.seq = e.at("seq").get<std::int64_t>();
        auto reason = parse_reason(e.at("reason").get<std::string>());
        if (!reason) return refuse(Reason::wrong_type, "unknown reason in a rejection");
        r.reason = *reason;
        r.detail = e.value("detail", "");
        out.ack.rejected.push_back(std::move(r));
      }
    } else if (type == "error") {
      out.type = ReplyType::error;
      out.error = ErrorReply{};
      out.error.batch_id = batch_id();
      auto reason = parse_reason(message.at("reason").get<std::string>());
      if (!reason) return refuse(Reason::wrong_type, "unknown reason in an error reply");
      out.error.reason = *reason;
      out.error.detail = message.value("detail", "");
    } else if (type == "hello") {
      out.type = ReplyType::hello;
      out.hello.source = message.at("source").get<std::string>();
      auto kind = parse_kind(message.at("kind").get<std::string>());
      if (!kind) return refuse(Reason::wrong_kind, "unknown kind in a hello reply");
      out.hello.kind = *kind;
      out.hello.next_seq = message.at("next_seq").get<std::int64_t>();
    } else {
      return refuse(Reason::unknown_type, "unknown reply type");
    }
  } catch (const json::exception& e) {
    return refuse(Reason::wrong_type, std::string("malformed reply: ") + e.what());
  }
  return std::nullopt;
}

}  // namespace lphi::protocol
