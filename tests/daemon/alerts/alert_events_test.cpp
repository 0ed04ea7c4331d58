// The event socket: a real ZeroMQ SUB connected to the EventPublisher over
// ipc in a temp dir receives two-frame messages (topic, JSON body), and the
// alert engine publishes every change of an alert on topic "alert".
#include <zmq.hpp>

#include "daemon/alerts/event_publisher.hpp"
#include "tests/daemon/alerts/alert_test_support.hpp"

namespace lphi::alerts {
namespace {

using testing::good_fit;
using testing::make_engine;

struct Message {
  std::string topic;
  nlohmann::json body;
};

// The next message within timeout_ms, if any.
std::optional<Message> receive(zmq::socket_t& sub, int timeout_ms) {
  zmq::pollitem_t item{sub.handle(), 0, ZMQ_POLLIN, 0};
  if (zmq::poll(&item, 1, std::chrono::milliseconds(timeout_ms)) <= 0) return std::nullopt;
  zmq::message_t topic, body;
  if (!sub.recv(topic, zmq::recv_flags::none)) return std::nullopt;
  EXPECT_TRUE(topic.more()) << "an event has two frames";
  if (!sub.recv(body, zmq::recv_flags::none)) return std::nullopt;
  EXPECT_FALSE(body.more());
  return Message{topic.to_string(), nlohmann::json::parse(body.to_string())};
}

class Events : public ::testing::Test {
 protected:
  void SetUp() override {
    const Status s = EventPublisher::create(context, "ipc://" + dir.file("events.sock"), publisher);
    ASSERT_TRUE(s.ok()) << s.message();
    sub.set(zmq::sockopt::subscribe, "");
    sub.connect(publisher->endpoint());
    // A subscription takes a moment to reach the publisher (ZeroMQ's "slow
    // joiner"): publish probes until one arrives.
    for (int i = 0; i < 200; ++i) {
      publisher->publish("probe", {{"i", i}});
      if (auto m = receive(sub, 20)) {
        ASSERT_EQ(m->topic, "probe");
        break;
      }
      ASSERT_LT(i, 199) << "the subscriber never connected";
    }
    while (receive(sub, 50)) {
    }
  }

  lphi::testing::TempDir dir;
  zmq::context_t context;
  std::unique_ptr<EventPublisher> publisher;
  zmq::socket_t sub{context, zmq::socket_type::sub};
};

TEST_F(Events, TopicAndBodyFrames) {
  const std::uint64_t before = publisher->published();
  publisher->publish("fit", {{"sweep_id", 7}, {"lphi_m", 1.5e-6}});
  const auto m = receive(sub, 2000);
  ASSERT_TRUE(m);
  EXPECT_EQ(m->topic, "fit");
  EXPECT_EQ(m->body["sweep_id"], 7);
  EXPECT_EQ(m->body["lphi_m"], 1.5e-6);
  EXPECT_EQ(publisher->published(), before + 1);
  EXPECT_EQ(publisher->dropped(), 0u);
}

TEST_F(Events, EngineChangesArePublished) {
  auto engine = make_engine(dir.file("lphi.db"), {}, publisher.get());
  FitFact bad = good_fit(1, 100.0);
  bad.chi2_red = 12.0;
  engine->on_fit(bad);
  auto m = receive(sub, 2000);
  ASSERT_TRUE(m);
  EXPECT_EQ(m->topic, "alert");
  EXPECT_EQ(m->body["rule"], "fit-chi2");
  EXPECT_EQ(m->body["change"], "raised");
  EXPECT_EQ(m->body["state"], "raised");
  EXPECT_EQ(m->body["raised_at"], 100.0);
  EXPECT_EQ(m->body["value"], 12.0);
  const std::int64_t id = m->body["id"];

  EXPECT_EQ(engine->handle_request({{"type", "ack"}, {"id", id}})["type"], "ack");
  m = receive(sub, 2000);
  ASSERT_TRUE(m);
  EXPECT_EQ(m->body["change"], "acknowledged");
  EXPECT_EQ(m->body["id"], id);

  engine->on_fit(good_fit(2, 200.0));
  engine->on_fit(good_fit(3, 300.0));
  m = receive(sub, 2000);
  ASSERT_TRUE(m);
  EXPECT_EQ(m->body["change"], "cleared");
  EXPECT_EQ(m->body["state"], "cleared");
  EXPECT_EQ(m->body["cleared_at"], 300.0);
  EXPECT_FALSE(receive(sub, 100)) << "nothing else was published";
}

TEST(EventPublisher, BadEndpointIsAnError) {
  zmq::context_t context;
  std::unique_ptr<EventPublisher> p;
  const Status s = EventPublisher::create(context, "carrier-pigeon://loft", p);
  EXPECT_FALSE(s.ok());
  EXPECT_NE(s.message().find("carrier-pigeon://loft"), std::string::npos) << s.message();
  EXPECT_FALSE(EventPublisher::create(context, "", p).ok());
}

// Nobody listening: publishing goes nowhere and returns at once.
TEST(EventPublisher, NoSubscriberIsFine) {
  lphi::testing::TempDir dir;
  zmq::context_t context;
  std::unique_ptr<EventPublisher> p;
  ASSERT_TRUE(EventPublisher::create(context, "ipc://" + dir.file("e.sock"), p).ok());
  for (int i = 0; i < 20000; ++i) p->publish("sweep", {{"i", i}});
  EXPECT_EQ(p->published(), 20000u);
  EXPECT_EQ(p->dropped(), 0u);
}

}  // namespace
}  // namespace lphi::alerts
