// Malformed and hostile messages sent to the real lphid over its real ingest
// socket. Each must be answered with its reason code (the codes are lphi's
// wire contract, daemon/PROTOCOL.md), be counted in lphid's status, and store
// nothing -- checked afterwards through a read-only SQLite connection.
#include <gtest/gtest.h>

#include <chrono>
#include <cmath>
#include <fstream>
#include <limits>
#include <sstream>
#include <zmq.hpp>

#include "daemon/config/data_dir.hpp"
#include "schema/protocol/codec.hpp"
#include "daemon/store/reader.hpp"
#include "tests/support/daemon_process.hpp"
#include "tests/support/wall_clock.hpp"
#include "tests/support/temp_dir.hpp"

namespace lphi::testing {
namespace {

using nlohmann::json;
using protocol::Reason;

std::string msgpack(const json& j) { return protocol::encode_frame(j, protocol::Encoding::msgpack); }
std::string text(const json& j) { return j.dump(); }

double now_s() { return lphi::testing::unix_now(); }

json good_lockin(std::int64_t seq) { return {{"seq", seq}, {"t", now_s()}, {"x_v", 1e-6}, {"y_v", 0.0}}; }

json batch(const std::string& source, json readings) {
  return {{"type", "batch"}, {"batch", 1}, {"source", source}, {"readings", std::move(readings)}};
}

json with(json j, const std::string& key, json value) {
  j[key] = std::move(value);
  return j;
}

json without(json j, const std::string& key) {
  j.erase(key);
  return j;
}

struct Case {
  std::string name;
  std::vector<std::string> frames;  // the payload, or several frames for envelope errors
  Reason reason;
  bool whole_message;  // refused as a message (error reply) or as a reading (in the ack)
};

std::vector<Case> hostile_cases() {
  const json ok_batch = batch("lockin-a", json::array({good_lockin(1)}));
  const std::string ok_msgpack = msgpack(ok_batch);
  const double nan = std::numeric_limits<double>::quiet_NaN();
  const double inf = std::numeric_limits<double>::infinity();
  auto reading_case = [](std::string name, const std::string& source, json reading, Reason reason,
                         bool as_msgpack = false) {
    const json b = batch(source, json::array({std::move(reading)}));
    return Case{std::move(name), {as_msgpack ? msgpack(b) : text(b)}, reason, false};
  };
  std::string nested(100000, '\x91');  // MessagePack arrays of one element, nested 100000 deep
  nested += '\x90';
  std::string million = "\xdd";  // array32 of 1e6 empty maps inside a batch
  {
    const std::uint32_t n = 1000000;
    million = msgpack(json{{"type", "batch"}, {"source", "lockin-a"}});
    million[0] = static_cast<char>(0x83);  // the map now has a third entry, "readings"
    million += msgpack("readings");
    million += '\xdd';
    for (int shift = 24; shift >= 0; shift -= 8) million += static_cast<char>((n >> shift) & 0xff);
    million += std::string(n, '\x80');
  }
  std::string far_too_big(100u << 20, ' ');  // 100 MB
  far_too_big[0] = '{';
  return {
      {"empty frame", {""}, Reason::bad_encoding, true},
      {"truncated MessagePack", {ok_msgpack.substr(0, ok_msgpack.size() / 2)}, Reason::bad_encoding, true},
      {"byte 0xc1", {"\xc1"}, Reason::bad_encoding, true},
      {"trailing bytes after MessagePack", {ok_msgpack + "\x01"}, Reason::bad_encoding, true},
      {"MessagePack nested 100000 deep", {nested}, Reason::bad_encoding, true},
      {"broken JSON", {R"({"type": "batch", "source": )"}, Reason::bad_encoding, true},
      {"JSON array at the top", {R"([1, 2, 3])"}, Reason::not_an_object, true},
      {"MessagePack integer at the top", {"\x2a"}, Reason::not_an_object, true},
      {"no type", {text(without(ok_batch, "type"))}, Reason::missing_field, true},
      {"type is a number", {text(with(ok_batch, "type", 7))}, Reason::wrong_type, true},
      {"unknown type", {text(with(ok_batch, "type", "drop_tables"))}, Reason::unknown_type, true},
      {"no source", {text(without(ok_batch, "source"))}, Reason::missing_field, true},
      {"source is a number", {text(with(ok_batch, "source", 12))}, Reason::wrong_type, true},
      {"source name not UTF-8", {msgpack(with(ok_batch, "source", std::string("lock\xff\xfe")))}, Reason::bad_name, true},
      {"source name of 10000 bytes", {text(with(ok_batch, "source", std::string(10000, 'a')))}, Reason::bad_name, true},
      {"source name with a newline", {text(with(ok_batch, "source", "lockin\n-a"))}, Reason::bad_name, true},
      {"unknown source", {text(with(ok_batch, "source", "lockin-z"))}, Reason::unknown_source, true},
      {"wrong kind for the source", {text(with(ok_batch, "kind", "thermometer"))}, Reason::wrong_kind, true},
      {"readings is a string", {text(with(ok_batch, "readings", "many"))}, Reason::wrong_type, true},
      {"no readings key", {text(without(ok_batch, "readings"))}, Reason::missing_field, true},
      {"empty readings", {text(with(ok_batch, "readings", json::array()))}, Reason::empty_batch, true},
      {"a million readings", {million}, Reason::batch_too_large, true},
      {"a 100 MB frame", {far_too_big}, Reason::frame_too_large, true},
      {"unknown key in the batch", {text(with(ok_batch, "priority", "urgent"))}, Reason::unknown_field, true},
      {"negative batch id", {text(with(ok_batch, "batch", -5))}, Reason::wrong_type, true},
      {"two payload frames", {text(ok_batch), text(ok_batch)}, Reason::bad_envelope, true},
      reading_case("NaN x_v", "lockin-a", with(good_lockin(1), "x_v", nan), Reason::not_finite, true),
      reading_case("infinite y_v", "lockin-a", with(good_lockin(1), "y_v", -inf), Reason::not_finite, true),
      reading_case("infinite t", "lockin-a", with(good_lockin(1), "t", inf), Reason::not_finite, true),
      reading_case("negative temperature", "mxc", {{"seq", 1}, {"t", now_s()}, {"temperature_k", -0.01}},
                   Reason::temperature_out_of_range),
      reading_case("temperature of 5000 K", "mxc", {{"seq", 1}, {"t", now_s()}, {"temperature_k", 5000.0}},
                   Reason::temperature_out_of_range),
      reading_case("field of 80 T", "magnet", {{"seq", 1}, {"t", now_s()}, {"field_t", -80.0}},
                   Reason::field_out_of_range),
      // 45 mT written as tesla: beyond the 30 T of schema/protocol/limits.hpp.
      reading_case("field of 45 T", "magnet", {{"seq", 1}, {"t", now_s()}, {"field_t", 45.0}},
                   Reason::field_out_of_range),
      reading_case("negative seq", "lockin-a", with(good_lockin(1), "seq", -3), Reason::bad_seq),
      reading_case("seq beyond 2^53", "lockin-a", with(good_lockin(1), "seq", std::uint64_t{1} << 60), Reason::bad_seq),
      reading_case("seq as a string", "lockin-a", with(good_lockin(1), "seq", "7"), Reason::wrong_type),
      reading_case("fractional seq", "lockin-a", with(good_lockin(1), "seq", 1.5), Reason::wrong_type),
      reading_case("x_v as a string", "lockin-a", with(good_lockin(1), "x_v", "1e-6"), Reason::wrong_type),
      reading_case("overload as a string", "lockin-a", with(good_lockin(1), "overload", "yes"), Reason::wrong_type),
      reading_case("no t", "lockin-a", without(good_lockin(1), "t"), Reason::missing_field),
      reading_case("unknown key in a reading", "lockin-a", with(good_lockin(1), "x_volts", 1.0), Reason::unknown_field),
      reading_case("a thermometer key on a lock-in", "lockin-a", with(good_lockin(1), "temperature_k", 1.0),
                   Reason::wrong_kind),
      reading_case("t a year ahead", "lockin-a", with(good_lockin(1), "t", now_s() + 3.2e7), Reason::time_out_of_range),
      reading_case("negative t", "lockin-a", with(good_lockin(1), "t", -1.0), Reason::time_out_of_range),
      reading_case("negative frequency", "lockin-a", with(good_lockin(1), "frequency_hz", -13.0),
                   Reason::value_out_of_range),
      reading_case("a reading that is a number", "lockin-a", 42, Reason::not_an_object),
      // Sequence numbers going backwards within a batch: the first reading
      // lies a year ahead (refused for its time), the second goes back.
      {"seq going backwards",
       {text(batch("lockin-a", json::array({with(good_lockin(9), "t", now_s() + 3.2e7), good_lockin(4)})))},
       Reason::seq_not_increasing, false},
  };
}

TEST(HostileInput, EveryKindIsRefusedWithItsReasonCountedAndStoresNothing) {
  TempDir dir;
  const std::string config = dir.file("lphid-test.toml");
  std::ofstream(config) << test_config();
  DaemonProcess daemon(dir.path(), config);
  ASSERT_TRUE(daemon.start());

  const auto cases = hostile_cases();
  ASSERT_GE(cases.size(), 25u);
  zmq::context_t context(1);
  zmq::socket_t socket(context, zmq::socket_type::dealer);
  socket.set(zmq::sockopt::linger, 0);
  socket.connect(config::client_endpoints(dir.path()).ingest);
  std::map<Reason, std::uint64_t> expected_messages, expected_readings;
  for (const auto& c : cases) {
    SCOPED_TRACE(c.name);
    for (std::size_t i = 0; i < c.frames.size(); ++i) {
      socket.send(zmq::buffer(c.frames[i]),
                  i + 1 < c.frames.size() ? zmq::send_flags::sndmore : zmq::send_flags::none);
    }
    zmq::pollitem_t item{socket.handle(), 0, ZMQ_POLLIN, 0};
    zmq::poll(&item, 1, std::chrono::seconds(20));
    zmq::message_t reply;
    ASSERT_TRUE((item.revents & ZMQ_POLLIN) && socket.recv(reply, zmq::recv_flags::dontwait))
        << "no reply";
    json message;
    protocol::Encoding encoding{};
    protocol::Limits limits;
    ASSERT_FALSE(protocol::decode_frame(reply.to_string_view(), limits, message, encoding));
    protocol::Reply r;
    ASSERT_FALSE(protocol::read_reply(message, r)) << message.dump();
    if (c.whole_message) {
      ASSERT_EQ(r.type, protocol::ReplyType::error) << message.dump();
      EXPECT_EQ(r.error.reason, c.reason) << message.dump();
      ++expected_messages[c.reason];
    } else {
      ASSERT_EQ(r.type, protocol::ReplyType::ack) << message.dump();
      EXPECT_EQ(r.ack.accepted, 0u);
      ASSERT_FALSE(r.ack.rejected.empty());
      // The case's reason is the one given for the batch's last reading.
      EXPECT_EQ(r.ack.rejected.back().reason, c.reason) << message.dump();
      EXPECT_EQ(r.ack.rejected.back().index, r.ack.rejected.size() - 1);
      for (const auto& rej : r.ack.rejected) ++expected_readings[rej.reason];
    }
  }

  // lphid's own counters agree, reason by reason.
  auto status = daemon.status(std::chrono::seconds(10));
  ASSERT_TRUE(status.has_value());
  const auto& counters = (*status)["counters"];
  EXPECT_EQ(counters["accepted"], 0);
  for (const auto& [reason, n] : expected_messages) {
    EXPECT_EQ(counters["refused_messages"].value(std::string(protocol::reason_name(reason)), 0u), n)
        << protocol::reason_name(reason);
  }
  for (const auto& [reason, n] : expected_readings) {
    EXPECT_EQ(counters["rejected_readings"].value(std::string(protocol::reason_name(reason)), 0u), n)
        << protocol::reason_name(reason);
  }
  EXPECT_EQ(daemon.stop(), 0);

  // And nothing reached the database.
  store::StoreReader reader;
  ASSERT_TRUE(store::StoreReader::open(store::database_path(dir.path()), reader).ok());
  std::vector<store::SourceRow> sources;
  ASSERT_TRUE(reader.sources(sources).ok());
  ASSERT_EQ(sources.size(), 3u);
  for (const auto& s : sources) {
    std::int64_t count = -1;
    ASSERT_TRUE(reader.reading_count(s, count).ok());
    EXPECT_EQ(count, 0) << s.name;
  }
}

// One field reading of 45 "T" (a field in mT sent as tesla) in a batch with
// a good one: the good one is stored, the bad one is refused in the ack with
// the unit hint, counted under its reason in lphid's status, logged, and
// absent from the database.
TEST(HostileInput, AFieldOf45TeslaIsRefusedWithAUnitHintCountedLoggedAndNotStored) {
  TempDir dir;
  const std::string config = dir.file("lphid-test.toml");
  std::ofstream(config) << test_config();
  DaemonProcess daemon(dir.path(), config);
  ASSERT_TRUE(daemon.start());

  zmq::context_t context(1);
  zmq::socket_t socket(context, zmq::socket_type::dealer);
  socket.set(zmq::sockopt::linger, 0);
  socket.connect(config::client_endpoints(dir.path()).ingest);
  const double t0 = now_s();
  const json b = batch("magnet", json::array({json{{"seq", 1}, {"t", t0}, {"field_t", 45.0}},
                                              json{{"seq", 2}, {"t", t0 + 0.1}, {"field_t", 0.045}}}));
  const std::string frame = msgpack(b);
  socket.send(zmq::buffer(frame), zmq::send_flags::none);
  zmq::pollitem_t item{socket.handle(), 0, ZMQ_POLLIN, 0};
  zmq::poll(&item, 1, std::chrono::seconds(20));
  zmq::message_t reply;
  ASSERT_TRUE((item.revents & ZMQ_POLLIN) && socket.recv(reply, zmq::recv_flags::dontwait)) << "no reply";
  json message;
  protocol::Encoding encoding{};
  protocol::Limits limits;
  ASSERT_FALSE(protocol::decode_frame(reply.to_string_view(), limits, message, encoding));
  protocol::Reply r;
  ASSERT_FALSE(protocol::read_reply(message, r)) << message.dump();
  ASSERT_EQ(r.type, protocol::ReplyType::ack) << message.dump();
  EXPECT_EQ(r.ack.accepted, 1u);
  ASSERT_EQ(r.ack.rejected.size(), 1u);
  EXPECT_EQ(r.ack.rejected[0].reason, Reason::field_out_of_range);
  EXPECT_EQ(r.ack.rejected[0].seq, std::optional<std::int64_t>(1));
  EXPECT_NE(r.ack.rejected[0].detail.find("field_t = 45 T is beyond the 30 T lphi accepts in magnitude: "
                                          "is it in mT? 45 mT would be 0.045 T"),
            std::string::npos)
      << r.ack.rejected[0].detail;

  auto status = daemon.status(std::chrono::seconds(10));
  ASSERT_TRUE(status.has_value());
  EXPECT_EQ((*status)["counters"]["accepted"], 1);
  EXPECT_EQ((*status)["counters"]["rejected_readings"].value("field_out_of_range", 0u), 1u) << status->dump();
  EXPECT_EQ(daemon.stop(), 0);

  std::ifstream log_file(dir.path() + "/lphid.log");
  std::ostringstream log_text;
  log_text << log_file.rdbuf();
  const std::string log = log_text.str();
  EXPECT_NE(log.find("source magnet: 1 of 2 readings refused, first: field_out_of_range"), std::string::npos)
      << log;
  EXPECT_NE(log.find("is it in mT?"), std::string::npos) << log;

  store::StoreReader reader;
  ASSERT_TRUE(store::StoreReader::open(store::database_path(dir.path()), reader).ok());
  store::SourceRow magnet;
  bool found = false;
  ASSERT_TRUE(reader.find_source("magnet", magnet, found).ok());
  ASSERT_TRUE(found);
  std::vector<double> stored;
  ASSERT_TRUE(reader
                  .readings(magnet, store::all_time_from, store::all_time_to,
                            [&](const protocol::Readings& chunk) {
                              for (const auto& f : std::get<std::vector<protocol::FieldReading>>(chunk)) {
                                stored.push_back(f.field_t);
                              }
                              return true;
                            })
                  .ok());
  EXPECT_EQ(stored, (std::vector<double>{0.045}));
}

}  // namespace
}  // namespace lphi::testing
