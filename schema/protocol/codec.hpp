// The ingest wire protocol: one codec (nlohmann::json) for both encodings.
//
// A message is one ZeroMQ frame holding one map, encoded either as JSON text
// or as MessagePack; lphid answers in the encoding it was spoken to. The
// message types and their keys are documented in daemon/PROTOCOL.md. This
// header turns frames into checked values and values into frames; it keeps no
// state, so the checks that need a source's history (time tolerance,
// duplicates, gaps) live in the daemon.
//
// Nothing here throws for bad input: every refusal is a Reason with a short
// human-readable detail.
#pragma once

#include <cstdint>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "schema/protocol/reading.hpp"
#include "schema/protocol/reason.hpp"

namespace lphi::protocol {

enum class Encoding { json, msgpack };
std::string_view encoding_name(Encoding encoding);
std::optional<Encoding> parse_encoding(std::string_view name);

struct Refusal {
  Reason reason;
  std::string detail;
};

struct RejectedReading {
  std::size_t index = 0;             // position in the batch's readings array
  std::optional<std::int64_t> seq;   // when the reading had a usable one
  Reason reason = Reason::wrong_type;
  std::string detail;
};

struct Limits {
  std::size_t max_frame_bytes = std::size_t{4} << 20;
  std::size_t max_batch_readings = 10000;
  std::size_t max_name_bytes = 64;
};

// Decodes a frame. JSON is recognised by its first non-blank byte '{' or '[',
// everything else is read as MessagePack.
std::optional<Refusal> decode_frame(std::string_view frame, const Limits& limits,
                                    nlohmann::json& out, Encoding& encoding);
std::string encode_frame(const nlohmann::json& message, Encoding encoding);

// A name (of a source) is 1..max_bytes of valid UTF-8 without control characters.
std::optional<Refusal> check_name(std::string_view name, const Limits& limits);
bool is_valid_utf8(std::string_view text);

// --- Requests, sender to lphid ---------------------------------------------

enum class RequestType { hello, batch };

// The "type" of a decoded message.
std::optional<Refusal> read_request_type(const nlohmann::json& message, RequestType& type);

struct HelloRequest {
  std::string source;
};
std::optional<Refusal> read_hello(const nlohmann::json& message, const Limits& limits,
                                  HelloRequest& out);

// The envelope of a batch; `readings` points into the decoded message.
struct BatchHeader {
  std::optional<std::uint64_t> batch_id;
  std::string source;
  std::optional<SourceKind> kind;  // optional in the message; checked against the config
  const nlohmann::json* readings = nullptr;
};
std::optional<Refusal> read_batch_header(const nlohmann::json& message, const Limits& limits,
                                         BatchHeader& out);

// Checks every reading for what can be judged alone: keys, types, finiteness,
// physical ranges, seq within range and increasing through the batch. Good
// readings are appended to `accepted` (which must hold `kind`), the others to
// `rejected`.
void read_readings(const nlohmann::json& readings, SourceKind kind, Readings& accepted,
                   std::vector<RejectedReading>& rejected);

nlohmann::json hello_message(std::string_view source);
nlohmann::json batch_message(std::uint64_t batch_id, std::string_view source,
                             const Readings& readings);
nlohmann::json reading_to_json(const LockinReading& r);
nlohmann::json reading_to_json(const ThermometerReading& r);
nlohmann::json reading_to_json(const FieldReading& r);

// --- Replies, lphid to sender ----------------------------------------------

// Every reading of the batch that is not listed in `rejected` is durable:
// stored now (accepted) or stored before (duplicate).
struct Ack {
  std::optional<std::uint64_t> batch_id;
  std::string source;
  std::optional<std::int64_t> durable_through;  // highest seq of the batch now stored
  std::uint64_t accepted = 0;
  std::uint64_t duplicates = 0;
  std::vector<RejectedReading> rejected;
};

struct ErrorReply {
  std::optional<std::uint64_t> batch_id;
  Reason reason = Reason::bad_encoding;
  std::string detail;
};

struct HelloReply {
  std::string source;
  SourceKind kind = SourceKind::lockin;
  std::int64_t next_seq = 0;  // one past the highest seq stored for the source
};

nlohmann::json ack_message(const Ack& ack);
nlohmann::json error_message(const ErrorReply& error);
nlohmann::json hello_reply_message(const HelloReply& hello);

enum class ReplyType { ack, error, hello };
struct Reply {
  ReplyType type = ReplyType::error;
  Ack ack;
  ErrorReply error;
  HelloReply hello;
};
// Reads a reply; refuses anything that is not a well-formed reply.
std::optional<Refusal> read_reply(const nlohmann::json& message, Reply& out);

}  // namespace lphi::protocol
