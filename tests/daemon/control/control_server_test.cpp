// ControlServer on a real ipc:// ROUTER socket with real DEALER clients:
// routing by type, errors naming what was wrong, a handler's exception as an
// error reply, and a deferred reply sent later from another thread to the
// client that asked, while the server keeps answering others.
#include <gtest/gtest.h>

#include <chrono>
#include <future>
#include <mutex>
#include <thread>
#include <zmq.hpp>

#include "daemon/control/control_server.hpp"
#include "daemon/health/failed_parts.hpp"
#include "tests/support/control_client.hpp"
#include "tests/support/temp_dir.hpp"

namespace {

using nlohmann::json;
using namespace std::chrono_literals;

json ask(zmq::socket_t& socket, const json& request, std::chrono::milliseconds timeout = 5000ms) {
  return lphi::testing::request_reply(socket, request, timeout);
}

zmq::socket_t client(zmq::context_t& context, const std::string& endpoint) {
  return lphi::testing::control_client(context, endpoint);
}

TEST(ControlServer, RoutesByTypeAndNamesWhatWasWrong) {
  lphi::testing::TempDir dir;
  const std::string endpoint = "ipc://" + dir.file("control.sock");
  zmq::context_t context(1);
  std::unique_ptr<lphi::control::ControlServer> server;
  ASSERT_TRUE(lphi::control::ControlServer::create(context, endpoint, lphi::protocol::Limits{}, server).ok());
  server->add_handler("echo", [](const json& r) { return json{{"type", "echo"}, {"n", r.value("n", 0) + 1}}; });
  server->add_handler("boom", [](const json&) -> json { throw std::runtime_error("the table is locked"); });
  lphi::health::FailedParts parts;
  server->start(&parts);
  auto c = client(context, endpoint);

  EXPECT_EQ(ask(c, {{"type", "echo"}, {"n", 41}}), (json{{"type", "echo"}, {"n", 42}}));
  const json unknown = ask(c, {{"type", "nope"}});
  EXPECT_EQ(unknown.value("type", ""), "error");
  EXPECT_EQ(unknown.value("reason", ""), "unknown_type");
  EXPECT_NE(unknown.value("detail", "").find("echo"), std::string::npos) << unknown.dump();
  const json boom = ask(c, {{"type", "boom"}});
  EXPECT_EQ(boom.value("type", ""), "error");
  EXPECT_NE(boom.value("detail", "").find("the table is locked"), std::string::npos) << boom.dump();
  // Not JSON at all: an error naming the encoding, and the server goes on.
  c.send(zmq::str_buffer("\xc1\xc1 not a frame"), zmq::send_flags::none);
  zmq::message_t garbage;
  ASSERT_TRUE(c.recv(garbage));
  // The reply is in the encoding lphid read the request as (JSON or MessagePack).
  json answer = json::parse(garbage.to_string_view(), nullptr, false);
  if (answer.is_discarded()) {
    const auto* bytes = static_cast<const std::uint8_t*>(garbage.data());
    answer = json::from_msgpack(bytes, bytes + garbage.size(), true, false);
  }
  ASSERT_TRUE(answer.is_object()) << garbage.to_string();
  EXPECT_EQ(answer.value("type", ""), "error");
  EXPECT_EQ(ask(c, {{"type", "echo"}, {"n", 1}}).value("n", 0), 2);
  EXPECT_TRUE(parts.list().empty());
  server->stop();
}

TEST(ControlServer, ADeferredReplyReachesTheClientThatAskedWhileOthersAreServed) {
  lphi::testing::TempDir dir;
  const std::string endpoint = "ipc://" + dir.file("control.sock");
  zmq::context_t context(1);
  std::unique_ptr<lphi::control::ControlServer> server;
  ASSERT_TRUE(lphi::control::ControlServer::create(context, endpoint, lphi::protocol::Limits{}, server).ok());
  std::mutex mutex;
  std::promise<lphi::control::Reply> kept;
  server->add_deferred_handler("later", [&](const json&, lphi::control::Reply reply) {
    std::lock_guard lock(mutex);
    kept.set_value(reply);  // answered later, from another thread
  });
  server->add_handler("now", [](const json&) { return json{{"type", "now"}}; });
  server->start(nullptr);
  auto waiting = client(context, endpoint);
  auto other = client(context, endpoint);

  waiting.send(zmq::str_buffer(R"({"type":"later"})"), zmq::send_flags::none);
  auto reply = kept.get_future().get();
  // The server is not blocked by the pending request.
  EXPECT_EQ(ask(other, {{"type", "now"}}), (json{{"type", "now"}}));
  zmq::pollitem_t item{waiting.handle(), 0, ZMQ_POLLIN, 0};
  zmq::poll(&item, 1, 200ms);
  EXPECT_FALSE(item.revents & ZMQ_POLLIN) << "nothing is sent before the handler replies";
  std::thread([reply] { reply.send({{"type", "later"}, {"durable", true}}); }).join();
  reply.send({{"type", "later"}, {"durable", false}});  // a second send is ignored
  zmq::poll(&item, 1, 5000ms);
  ASSERT_TRUE(item.revents & ZMQ_POLLIN);
  zmq::message_t m;
  ASSERT_TRUE(waiting.recv(m));
  EXPECT_EQ(json::parse(m.to_string_view()), (json{{"type", "later"}, {"durable", true}}));
  zmq::poll(&item, 1, 200ms);
  EXPECT_FALSE(item.revents & ZMQ_POLLIN) << "one reply per request";
  server->stop();
}

}  // namespace
