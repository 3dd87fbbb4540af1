// api::Methods with board commands whose reply waits for the board: the
// control methods go to a real ResetDriver behind a real BoardCommands (the
// rig of reset_rig.hpp), and the reply comes only once the test acks the
// command frame, fails to, or the board refuses. The codes and shapes are
// docs/api.md's (JSON-RPC 2.0 for the envelope and batches).
#include <catch2/catch.hpp>

#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "daemon/api/hub.hpp"
#include "daemon/api/link_control.hpp"
#include "daemon/api/methods.hpp"
#include "reset_rig.hpp"

using namespace accrue::daemon;
using accrue::protocol::AckStatus;
using accrue::protocol::CommandAck;
using accrue::protocol::CommandOp;
using accrue::test::ResetRig;
using accrue::test::schedule_from;
using nlohmann::json;

namespace {

// The daemon's Control without the link and ingest checks: board commands go
// to the driver and come back through api::control_result, as LinkControl's do.
struct DriverControl final : api::Control {
  explicit DriverControl(ResetDriver& d) : driver(d) {}
  void reset_now(api::ControlDone done) override { send(OperatorRequest::reset_now, std::move(done)); }
  void zero_window(bool start, api::ControlDone done) override {
    send(start ? OperatorRequest::zero_relay_on : OperatorRequest::zero_relay_off, std::move(done));
  }
  api::ControlResult mark_quiet(std::optional<int>, std::uint64_t, std::uint64_t, const std::string&) override {
    return {false, false, false, "quiet windows are not part of this test", json::object()};
  }
  void send(OperatorRequest what, api::ControlDone done) {
    driver.command(what, [done = std::move(done)](const OperatorResult& r) { done(api::control_result(r)); });
  }
  ResetDriver& driver;
};

struct Api {
  ResetRig rig{schedule_from("{}")};
  DriverControl control{rig.driver};
  api::Hub hub;
  // The store is opened on first use only; no method here reads it.
  api::Methods methods{"/nonexistent/accrue-api-methods-test.db", [] { return json{{"state", "testing"}}; }, hub,
                       &control};
  api::Peer peer;
  std::vector<std::optional<std::string>> replies;  // every respond() call, in order

  Api() { rig.block(0.1); }  // the board's capabilities come with its blocks
  void line(const std::string& text) {
    methods.handle_line(text, peer, [this](std::optional<std::string> r) { replies.push_back(std::move(r)); });
  }
  json reply(std::size_t k) const {
    REQUIRE(k < replies.size());
    REQUIRE(replies[k].has_value());
    return json::parse(*replies[k]);
  }
};

}  // namespace

TEST_CASE("api methods: reset_now is answered only once the board acknowledges it", "[api][methods]") {
  Api a;
  a.line(R"({"jsonrpc":"2.0","id":10,"method":"reset_now"})");
  REQUIRE(a.rig.sent.size() == 1);
  CHECK(a.rig.sent[0].op == CommandOp::reset_now);
  CHECK(a.replies.empty());  // deferred: the board has not answered
  a.line(R"({"jsonrpc":"2.0","id":11,"method":"status"})");  // other requests are answered meanwhile
  REQUIRE(a.replies.size() == 1);
  CHECK(a.reply(0)["id"] == 11);
  a.rig.commands.on_ack(CommandAck{a.rig.sent[0].request_id, AckStatus::ok}, a.rig.now);
  REQUIRE(a.replies.size() == 2);
  const json r = a.reply(1);
  CHECK(r["jsonrpc"] == "2.0");
  CHECK(r["id"] == 10);
  REQUIRE(r.contains("result"));
  CHECK(r["result"]["acknowledged"] == true);
  CHECK(r["result"]["sent"] == true);
  CHECK(r["result"]["request_id"] == a.rig.sent[0].request_id);
  CHECK(r["result"]["attempts"] == 1);
  CHECK(a.rig.driver.status()["operator_acked"] == 1);
}

TEST_CASE("api methods: zero_start refused by the board is error -32004 with the board's status", "[api][methods]") {
  Api a;
  a.line(R"({"jsonrpc":"2.0","id":"z","method":"zero_start"})");
  REQUIRE(a.rig.sent.size() == 1);
  CHECK(a.rig.sent[0].op == CommandOp::zero_relay);
  CHECK(a.rig.sent[0].argument == 1);
  CHECK(a.replies.empty());
  a.rig.commands.on_ack(CommandAck{a.rig.sent[0].request_id, AckStatus::bad_argument}, a.rig.now);
  const json r = a.reply(0);
  CHECK(r["id"] == "z");
  REQUIRE(r.contains("error"));
  CHECK(r["error"]["code"] == api::rpc_error::control_refused);
  CHECK(r["error"]["message"] == "control refused: the board refused request " +
                                     std::to_string(a.rig.sent[0].request_id) + ": bad_argument");
  CHECK(r["error"]["data"]["acknowledged"] == false);
  CHECK(r["error"]["data"]["sent"] == true);
  CHECK(r["error"]["data"]["request_id"] == a.rig.sent[0].request_id);
  CHECK(r["error"]["data"]["outcome"] == "refused_by_board");
  CHECK(r["error"]["data"]["board_status"] == "bad_argument");
}

TEST_CASE("api methods: zero_stop never acknowledged is error -32007 after the retries", "[api][methods]") {
  Api a;
  a.line(R"({"jsonrpc":"2.0","id":3,"method":"zero_stop"})");
  for (int i = 0; i < 30 && a.replies.empty(); ++i) a.rig.block(0.1);  // host time passes, no ack
  CHECK(a.rig.sent.size() == 3);
  const json r = a.reply(0);
  CHECK(r["error"]["code"] == api::rpc_error::control_unconfirmed);
  CHECK(r["error"]["code"] == -32007);  // docs/api.md, Errors
  CHECK(r["error"]["data"]["outcome"] == "timed_out");
  CHECK(r["error"]["data"]["attempts"] == 3);
  CHECK(r["error"]["data"]["acknowledged"] == false);
  CHECK(a.replies.size() == 1);  // exactly once
}

TEST_CASE("api methods: a board without the capability is refused at once, nothing sent", "[api][methods]") {
  Api a;
  a.rig.capabilities = 0;
  a.rig.block(0.1);
  a.line(R"({"jsonrpc":"2.0","id":4,"method":"reset_now"})");
  REQUIRE(a.replies.size() == 1);  // before handle_line returned
  const json r = a.reply(0);
  CHECK(r["error"]["code"] == -32004);
  CHECK(r["error"]["message"] == "control refused: the board has no reset switch");
  CHECK(r["error"]["data"]["sent"] == false);
  CHECK(r["error"]["data"]["request_id"] == nullptr);
  CHECK(r["error"]["data"]["outcome"] == "no_capability");
  CHECK(a.rig.sent.empty());
  a.line(R"({"jsonrpc":"2.0","id":5,"method":"reset_now","params":{"now":true}})");
  CHECK(a.reply(1)["error"]["code"] == -32602);  // params are checked before anything is asked
}

TEST_CASE("api methods: a batch with a board command is answered whole once the board has answered", "[api][methods]") {
  Api a;
  a.line(R"([{"jsonrpc":"2.0","id":1,"method":"zero_start"},{"jsonrpc":"2.0","id":2,"method":"status"},)"
         R"({"jsonrpc":"2.0","method":"reset_now"},[],{"jsonrpc":"2.0","id":3,"method":"zero_stop"}])");
  REQUIRE(a.rig.sent.size() == 3);
  CHECK(a.replies.empty());
  // Acked out of order; the batch's array keeps the request order (notifications left out).
  a.rig.commands.on_ack(CommandAck{a.rig.sent[2].request_id, AckStatus::ok}, a.rig.now);
  a.rig.commands.on_ack(CommandAck{a.rig.sent[1].request_id, AckStatus::ok}, a.rig.now);
  CHECK(a.replies.empty());  // zero_start still waits
  a.rig.commands.on_ack(CommandAck{a.rig.sent[0].request_id, AckStatus::busy}, a.rig.now);
  REQUIRE(a.replies.size() == 1);
  const json r = a.reply(0);
  REQUIRE(r.is_array());
  REQUIRE(r.size() == 4);
  CHECK(r[0]["id"] == 1);
  CHECK(r[0]["error"]["code"] == -32004);
  CHECK(r[1]["id"] == 2);
  CHECK(r[1]["result"]["state"] == "testing");
  CHECK(r[2]["error"]["code"] == -32600);  // the nested batch
  CHECK(r[3]["id"] == 3);
  CHECK(r[3]["result"]["acknowledged"] == true);
}

TEST_CASE("api methods: a board command sent as a notification is carried out and answers nothing", "[api][methods]") {
  Api a;
  a.line(R"({"jsonrpc":"2.0","method":"reset_now"})");
  REQUIRE(a.rig.sent.size() == 1);
  CHECK(a.replies.empty());
  a.rig.commands.on_ack(CommandAck{a.rig.sent[0].request_id, AckStatus::ok}, a.rig.now);
  REQUIRE(a.replies.size() == 1);
  CHECK_FALSE(a.replies[0].has_value());  // respond() is still called once, with nothing to send
  CHECK(a.rig.driver.counters().operator_acked == 1);
  a.line(R"([{"jsonrpc":"2.0","method":"zero_start"}])");  // a batch of notifications only
  REQUIRE(a.rig.sent.size() == 2);
  a.rig.commands.on_ack(CommandAck{a.rig.sent[1].request_id, AckStatus::ok}, a.rig.now);
  REQUIRE(a.replies.size() == 2);
  CHECK_FALSE(a.replies[1].has_value());
}

TEST_CASE("api methods: control_result names every outcome the driver reports", "[api][methods]") {
  OperatorResult acked{OperatorOutcome::acknowledged, 7, AckStatus::ok, 2, ""};
  api::ControlResult c = api::control_result(acked);
  CHECK(c.ok);
  CHECK(c.detail == json{{"sent", true}, {"request_id", 7}, {"acknowledged", true}, {"attempts", 2}});
  OperatorResult lost{OperatorOutcome::link_lost, 8, AckStatus::ok, 1, "the link went down"};
  c = api::control_result(lost);
  CHECK_FALSE(c.ok);
  CHECK(c.no_answer);  // the board may have acted: not a refusal
  CHECK(c.message == "the link went down");
  CHECK(c.detail["outcome"] == "link_lost");
  CHECK_FALSE(c.detail.contains("board_status"));
  OperatorResult queue{OperatorOutcome::not_sent, 0, AckStatus::ok, 0, "too many commands pending"};
  c = api::control_result(queue);
  CHECK_FALSE(c.ok);
  CHECK_FALSE(c.no_answer);
  CHECK(c.detail["sent"] == false);
  CHECK_FALSE(c.detail.contains("attempts"));
}
