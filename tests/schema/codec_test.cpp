// The wire codec on its own: MessagePack and JSON must decode to the same
// readings, and nlohmann's MessagePack output must match the MessagePack
// specification's byte layout (github.com/msgpack/msgpack/blob/master/spec.md).
#include <gmock/gmock.h>
#include <gtest/gtest.h>

#include <cmath>
#include <sstream>

#include "schema/protocol/codec.hpp"
#include "schema/protocol/limits.hpp"

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

namespace lphi::protocol {
namespace {

// A bound as the refusal texts print it ("30", "1000").
std::string fmt_bound(double v) {
  std::ostringstream o;
  o << v;
  return o.str();
}

// One reading of `kind` through the reading checks; the refusal, if any.
std::optional<RejectedReading> check_one(SourceKind kind, const nlohmann::json& reading) {
  Readings got = empty_readings(kind);
  std::vector<RejectedReading> rejected;
  read_readings(nlohmann::json::array({reading}), kind, got, rejected);
  if (rejected.empty()) return std::nullopt;
  return rejected.front();
}

TEST(ReadingChecks, LimitsComeFromLimitsHppAndRefusalsCarryAUnitHint) {
  using nlohmann::json;
  using ::testing::HasSubstr;
  const double b_max = limits::max_abs_field_t;
  const double t_max = limits::max_temperature_k;
  // The bound itself is accepted, anything beyond refused (either sign).
  EXPECT_FALSE(check_one(SourceKind::field, {{"seq", 1}, {"t", 1.7e9}, {"field_t", b_max}}));
  EXPECT_FALSE(check_one(SourceKind::field, {{"seq", 1}, {"t", 1.7e9}, {"field_t", -b_max}}));
  for (double b : {std::nextafter(b_max, 100.0), -45.0, 45.0, 1e300}) {
    const auto r = check_one(SourceKind::field, {{"seq", 1}, {"t", 1.7e9}, {"field_t", b}});
    ASSERT_TRUE(r) << b;
    EXPECT_EQ(r->reason, Reason::field_out_of_range);
    EXPECT_THAT(r->detail, HasSubstr(fmt_bound(b_max) + " T lphi accepts in magnitude"));
  }
  // 45 read as mT is 0.045 T: the hint names mT and the converted value
  // (1 mT = 1e-3 T, SI Brochure 9th ed., table 7).
  auto r = check_one(SourceKind::field, {{"seq", 1}, {"t", 1.7e9}, {"field_t", 45.0}});
  ASSERT_TRUE(r);
  EXPECT_THAT(r->detail, HasSubstr("field_t = 45 T is beyond"));
  EXPECT_THAT(r->detail, HasSubstr("is it in mT? 45 mT would be 0.045 T (field_t is in tesla)"));
  // 45000 is beyond the bound in mT too (45 T), within it in gauss
  // (1 G = 1e-4 T, SI Brochure 9th ed., section 4): the hint says G.
  r = check_one(SourceKind::field, {{"seq", 1}, {"t", 1.7e9}, {"field_t", -45000.0}});
  ASSERT_TRUE(r);
  EXPECT_THAT(r->detail, HasSubstr("is it in G? -45000 G would be -4.5 T"));

  EXPECT_FALSE(check_one(SourceKind::thermometer, {{"seq", 1}, {"t", 1.7e9}, {"temperature_k", 999.0}}));
  r = check_one(SourceKind::thermometer, {{"seq", 1}, {"t", 1.7e9}, {"temperature_k", t_max}});
  ASSERT_TRUE(r);
  EXPECT_EQ(r->reason, Reason::temperature_out_of_range);
  EXPECT_THAT(r->detail, HasSubstr("1000 K is outside (0, " + fmt_bound(t_max) + ") K"));
  r = check_one(SourceKind::thermometer, {{"seq", 1}, {"t", 1.7e9}, {"temperature_k", 1500.0}});
  ASSERT_TRUE(r);
  EXPECT_THAT(r->detail, HasSubstr("is it in mK? 1500 mK would be 1.5 K (temperature_k is in kelvin)"));
  // A negative temperature is no unit mistake: no hint.
  r = check_one(SourceKind::thermometer, {{"seq", 1}, {"t", 1.7e9}, {"temperature_k", -0.5}});
  ASSERT_TRUE(r);
  EXPECT_THAT(r->detail, HasSubstr("-0.5 K is outside (0, "));
  EXPECT_THAT(r->detail, ::testing::Not(HasSubstr("is it in")));
}

}  // namespace
}  // namespace lphi::protocol
