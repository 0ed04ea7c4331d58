#include "schema/protocol/codec.hpp"

#include "schema/protocol/codec_detail.hpp"
#include "schema/protocol/msgpack_shape.hpp"

namespace lphi::protocol {

using nlohmann::json;
using detail::refuse;
using detail::type_name;

namespace {

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
    if (auto why = detail::check_msgpack_shape(frame)) return refuse(Reason::bad_encoding, *why);
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
