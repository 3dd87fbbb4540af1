#include <catch2/catch.hpp>

#include <set>

#include "daemon/board_commands.hpp"

using namespace accrue::daemon;
using accrue::protocol::AckStatus;
using accrue::protocol::BoardCommand;
using accrue::protocol::CommandAck;
using accrue::protocol::CommandOp;

namespace {
struct Harness {
  std::vector<BoardCommand> sent;
  std::vector<CommandResult> done;
  BoardCommands commands{BoardCommandSettings{0.5, 3, 4}, [this](const BoardCommand& c) { sent.push_back(c); }};
  std::uint16_t submit(CommandOp op, std::uint32_t arg, double now) {
    return commands.submit(op, arg, now, [this](const CommandResult& r) { done.push_back(r); });
  }
};
}  // namespace

TEST_CASE("board commands: an ack completes the command with the board's status", "[daemon][commands]") {
  Harness h;
  const auto id = h.submit(CommandOp::zero_relay, 1, 10.0);
  REQUIRE(h.sent.size() == 1);
  CHECK(h.sent[0] == BoardCommand{id, CommandOp::zero_relay, 1});
  h.commands.on_ack(CommandAck{id, AckStatus::busy}, 10.2);
  REQUIRE(h.done.size() == 1);
  CHECK(h.done[0].outcome == CommandOutcome::acked);
  CHECK(h.done[0].status == AckStatus::busy);
  CHECK(h.done[0].attempts == 1);
  CHECK(h.done[0].round_trip_s == Approx(0.2));
  CHECK(h.commands.pending() == 0);
}

TEST_CASE("board commands: resent with the same id after each timeout, then given up", "[daemon][commands]") {
  Harness h;
  const auto id = h.submit(CommandOp::ping, 0, 0.0);
  h.commands.tick(0.49);
  CHECK(h.sent.size() == 1);  // not yet
  h.commands.tick(0.5);
  h.commands.tick(1.0);
  REQUIRE(h.sent.size() == 3);
  for (const auto& c : h.sent) CHECK(c.request_id == id);
  h.commands.tick(1.49);
  CHECK(h.done.empty());
  h.commands.tick(1.5);
  REQUIRE(h.done.size() == 1);
  CHECK(h.done[0].outcome == CommandOutcome::timed_out);
  CHECK(h.done[0].attempts == 3);
  CHECK(h.commands.counters().retries == 2);
  CHECK(h.commands.counters().timed_out == 1);
  // A late ack for the given-up command is counted, not matched.
  h.commands.on_ack(CommandAck{id, AckStatus::ok}, 2.0);
  CHECK(h.commands.counters().unknown_acks == 1);
  CHECK(h.done.size() == 1);
}

TEST_CASE("board commands: an ack to a resent command matches the same request", "[daemon][commands]") {
  Harness h;
  const auto id = h.submit(CommandOp::reset_now, 0, 0.0);
  h.commands.tick(0.6);
  h.commands.on_ack(CommandAck{id, AckStatus::ok}, 0.7);
  REQUIRE(h.done.size() == 1);
  CHECK(h.done[0].attempts == 2);
  CHECK(h.done[0].round_trip_s == Approx(0.1));
  h.commands.on_ack(CommandAck{id, AckStatus::ok}, 0.8);  // the first copy's ack, late
  CHECK(h.commands.counters().unknown_acks == 1);
}

TEST_CASE("board commands: request ids are distinct, skip 0, and pending is bounded", "[daemon][commands]") {
  Harness h;
  std::set<std::uint16_t> ids;
  for (int i = 0; i < 4; ++i) ids.insert(h.submit(CommandOp::ping, 0, 0.0));
  CHECK(ids.size() == 4);
  CHECK(ids.count(0) == 0);
  CHECK(h.submit(CommandOp::ping, 0, 0.0) == 0);  // refused: max_pending
  CHECK(h.commands.counters().refused == 1);
  h.commands.abandon_all();
  CHECK(h.done.size() == 4);
  CHECK(h.done[0].outcome == CommandOutcome::link_lost);
}

TEST_CASE("board commands: ids wrap past 65535 without using 0", "[daemon][commands]") {
  Harness h;
  std::uint16_t last = 0;
  for (int i = 0; i < 65536; ++i) {
    last = h.submit(CommandOp::ping, 0, 0.0);
    REQUIRE(last != 0);
    h.commands.on_ack(CommandAck{last, AckStatus::ok}, 0.0);
  }
  CHECK(last == 1);
}
