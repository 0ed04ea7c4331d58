// The wire codec on its own: MessagePack and JSON must decode to the same
// readings, and nlohmann's MessagePack output must match the MessagePack
// specification's byte layout (github.com/msgpack/msgpack/blob/master/spec.md).
#include <gtest/gtest.h>

#include "schema/protocol/codec.hpp"

namespace lphi::protocol {
namespace {

using nlohmann::json;

TEST(Codec, MessagePackBytesFollowTheSpecification) {
  // From the spec: fixmap 0x81, fixstr 0xa1 'a', then the number. nlohmann
  // writes float32 (0xca) when that is exact -- 1.5 is 0x3fc00000 -- and
  // float64 (0xcb) otherwise: 0.1 is 0x3fb999999999999a in IEEE-754.
  EXPECT_EQ(encode_frame(json{{"a", 1.5}}, Encoding::msgpack),
            std::string("\x81\xa1" "a" "\xca\x3f\xc0\x00\x00", 8));
  EXPECT_EQ(encode_frame(json{{"a", 0.1}}, Encoding::msgpack),
            std::string("\x81\xa1" "a" "\xcb\x3f\xb9\x99\x99\x99\x99\x99\x9a", 12));
}

TEST(Codec, JsonAndMessagePackDecodeToTheSameReadings) {
  Readings sent = std::vector<LockinReading>{{1, 1.7e9 + 0.1, 1e-6, -2e-9, 13.0, 0.01, 0.3, false},
                                              {2, 1.7e9 + 0.2, 2e-6, -1e-9, std::nullopt, std::nullopt,
                                               std::nullopt, std::nullopt}};
  const json message = batch_message(7, "lockin-a", sent);
  for (Encoding e : {Encoding::json, Encoding::msgpack}) {
    json decoded;
    Encoding seen{};
    Limits limits;
    ASSERT_FALSE(decode_frame(encode_frame(message, e), limits, decoded, seen));
    EXPECT_EQ(seen, e);
    BatchHeader header;
    ASSERT_FALSE(read_batch_header(decoded, limits, header));
    EXPECT_EQ(header.batch_id, 7u);
    Readings got = empty_readings(SourceKind::lockin);
    std::vector<RejectedReading> rejected;
    read_readings(*header.readings, SourceKind::lockin, got, rejected);
    EXPECT_TRUE(rejected.empty());
    EXPECT_EQ(got, sent);
  }
}

TEST(Codec, Utf8ValidationFollowsRfc3629) {
  // RFC 3629 section 3: overlong forms and surrogates are invalid.
  EXPECT_TRUE(is_valid_utf8("mxc \xc3\xa9\xe2\x82\xac\xf0\x9f\x98\x80"));
  EXPECT_FALSE(is_valid_utf8("\xc0\xaf"));          // overlong '/'
  EXPECT_FALSE(is_valid_utf8("\xed\xa0\x80"));      // U+D800, a surrogate
  EXPECT_FALSE(is_valid_utf8("\xf4\x90\x80\x80"));  // beyond U+10FFFF
  EXPECT_FALSE(is_valid_utf8("\xe2\x82"));          // truncated
}

TEST(Codec, ReasonNamesRoundTripAndAreUnique) {
  for (std::size_t i = 0; i < reason_count; ++i) {
    const auto r = static_cast<Reason>(i);
    EXPECT_EQ(parse_reason(reason_name(r)), r) << reason_name(r);
  }
}

TEST(Codec, AckRoundTrip) {
  Ack ack;
  ack.batch_id = 99;
  ack.source = "mxc";
  ack.durable_through = 1234;
  ack.accepted = 10;
  ack.duplicates = 2;
  ack.rejected.push_back({3, 1226, Reason::temperature_out_of_range, "too hot"});
  for (Encoding e : {Encoding::json, Encoding::msgpack}) {
    json decoded;
    Encoding seen{};
    Limits limits;
    ASSERT_FALSE(decode_frame(encode_frame(ack_message(ack), e), limits, decoded, seen));
    Reply reply;
    ASSERT_FALSE(read_reply(decoded, reply));
    ASSERT_EQ(reply.type, ReplyType::ack);
    EXPECT_EQ(reply.ack.batch_id, 99u);
    EXPECT_EQ(reply.ack.durable_through, 1234);
    EXPECT_EQ(reply.ack.accepted, 10u);
    ASSERT_EQ(reply.ack.rejected.size(), 1u);
    EXPECT_EQ(reply.ack.rejected[0].reason, Reason::temperature_out_of_range);
    EXPECT_EQ(reply.ack.rejected[0].seq, 1226);
  }
}

}  // namespace
}  // namespace lphi::protocol
