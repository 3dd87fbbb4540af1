#include <catch2/catch.hpp>

#include <string>
#include <vector>

#include "daemon/board_commands.hpp"
#include "daemon/options.hpp"
#include "daemon/reset_driver.hpp"
#include "protocol/messages.hpp"
#include "reset_rig.hpp"

using namespace accrue::daemon;
namespace status_bit = accrue::protocol::status_bit;
namespace capability_bit = accrue::protocol::capability_bit;
using accrue::protocol::AckStatus;
using accrue::protocol::BoardCommand;
using accrue::protocol::CommandAck;
using accrue::protocol::CommandOp;

using accrue::test::ResetRig;
using accrue::test::schedule_from;
using Rig = ResetRig;

TEST_CASE("reset driver: the config's schedule maps onto the scheduler's settings", "[daemon][schedule]") {
  const auto s = scheduler_settings(schedule_from(R"({"reset_schedule": {
      "interval_s": 120, "threshold_fraction": 0.8, "threshold_hysteresis": 0.1,
      "calendar": [{"at": "03:30", "days": ["mon", "sun"], "zero_window_s": 60}, {"at": "23:59"},
                   {"at": "12:00:45"}]}})"));
  CHECK(s.interval_s == 120.0);
  CHECK(s.threshold_fraction == 0.8);
  CHECK(s.rearm_fraction == Approx(0.7));  // re-armed 0.1 of full scale below the threshold
  CHECK(s.full_scale_v == 1.0);            // the driver passes levels as fractions of full scale
  REQUIRE(s.calendar.size() == 3);
  CHECK(s.calendar[2].second_of_day_utc == 12 * 3600 + 45);  // seconds when given
  CHECK(s.calendar[0].second_of_day_utc == 3 * 3600 + 30 * 60);
  CHECK(s.calendar[0].weekdays == 0x41);  // bit 0 Monday, bit 6 Sunday
  CHECK(s.calendar[0].zero_window_s == 60.0);
  CHECK(s.calendar[1].second_of_day_utc == 23 * 3600 + 59 * 60);
  CHECK(s.calendar[1].weekdays == 0x7F);  // no days listed: every day
  CHECK(s.calendar[1].zero_window_s == 0.0);
  CHECK(s.min_spacing_s > 0.0);
}

TEST_CASE("reset driver: without hysteresis the threshold re-arms at half, and no keys mean no schedule", "[daemon][schedule]") {
  const ResetSchedule t = schedule_from(R"({"reset_schedule": {"threshold_fraction": 0.6}})");
  CHECK(schedule_enabled(t));
  const auto s = scheduler_settings(t);
  CHECK(s.interval_s == 0.0);
  CHECK(s.rearm_fraction == 0.0);  // the scheduler's default: half the threshold
  CHECK(accrue::chain::ResetScheduler(s).resets_asked() == 0);
  const ResetSchedule none = schedule_from("{}");
  CHECK_FALSE(schedule_enabled(none));
  const auto n = scheduler_settings(none);
  CHECK(n.interval_s == 0.0);
  CHECK(n.threshold_fraction == 0.0);
  CHECK(n.calendar.empty());
}

TEST_CASE("reset driver: an interval decision is sent as reset_now, acked, and the reset it causes is named", "[daemon][schedule]") {
  Rig rig(schedule_from(R"({"reset_schedule": {"interval_s": 2}})"));
  for (int i = 0; i < 20; ++i) rig.block(0.1);  // board time 0.099 .. 1.999 s: not 2 s after the first block
  CHECK(rig.sent.empty());
  rig.block(0.1);  // 2.099 s: due (or, by rounding of 2.099 - 0.099, at the next block)
  if (rig.sent.empty()) rig.block(0.1);
  REQUIRE(rig.sent.size() == 1);
  CHECK(rig.sent[0].op == CommandOp::reset_now);
  CHECK(rig.count("reset_commanded") == 1);
  CHECK(rig.events.back().detail.find("reason=interval") != std::string::npos);
  rig.commands.on_ack(CommandAck{rig.sent[0].request_id, AckStatus::ok}, rig.now);
  rig.block(0.0, 0.0, status_bit::reset_active);  // the board discharges
  rig.block(0.0);
  const auto st = rig.driver.status();
  CHECK(st["commanded"] == 1);
  CHECK(st["acked"] == 1);
  CHECK(st["failed"] == 0);
  CHECK(st["resets_seen"] == 1);
  CHECK(st["board_initiated"] == 0);
  CHECK(st["last_reset"]["why"] == "interval");
  const std::uint64_t reset_index = st["last_reset"]["sample_index"];
  CHECK((reset_index == 2199 || reset_index == 2299));
  // The next one is planned 2 s after the reset was seen (board time 2.199 or 2.299 s, plus 2 s).
  CHECK(st["next_reset"]["why"] == "interval");
  CHECK(st["next_reset"]["utc"] == (reset_index == 2199 ? "2026-12-02T00:00:04.199Z" : "2026-12-02T00:00:04.299Z"));
  REQUIRE(st["channels"].size() == 2);
  CHECK(st["channels"][1]["commanded"] == 1);
}

TEST_CASE("reset driver: a threshold crossing on any channel resets the board", "[daemon][schedule]") {
  Rig rig(schedule_from(R"({"reset_schedule": {"threshold_fraction": 0.5, "threshold_hysteresis": 0.1}})"));
  rig.block(0.2, 0.45);
  CHECK(rig.sent.empty());
  rig.block(0.2, 0.55);  // channel 1 crosses 0.5
  REQUIRE(rig.sent.size() == 1);
  CHECK(rig.events.back().detail.find("reason=threshold") != std::string::npos);
  const auto st = rig.driver.status();
  CHECK(st["next_reset"]["why"] == "threshold");
  CHECK(st["channels"][0]["threshold_v"] == Approx(5.0));
  CHECK(st["channels"][1]["level_fraction"] == Approx(0.55));
}

TEST_CASE("reset driver: a command never acked, or refused by the board, is counted failed with an event", "[daemon][schedule]") {
  Rig rig(schedule_from(R"({"reset_schedule": {"threshold_fraction": 0.5}})"));
  rig.block(0.6);
  REQUIRE(rig.sent.size() == 1);
  for (int i = 0; i < 20; ++i) rig.block(0.6);  // 2 s of host time: three sends, no ack
  CHECK(rig.sent.size() == 3);
  CHECK(rig.driver.counters().failed == 1);
  REQUIRE(rig.count("reset_command_failed") == 1);
  for (const auto& e : rig.events)
    if (e.kind == "reset_command_failed") CHECK(e.detail.find("outcome=timed_out attempts=3") != std::string::npos);
  // The scheduler asks again after its command timeout (5 s board time); the board answers busy.
  for (int i = 0; i < 40 && rig.sent.size() == 3; ++i) rig.block(0.6);
  REQUIRE(rig.sent.size() == 4);
  CHECK(rig.events.back().detail.find("reason=retry") != std::string::npos);
  rig.commands.on_ack(CommandAck{rig.sent[3].request_id, AckStatus::busy}, rig.now);
  CHECK(rig.driver.counters().failed == 2);
  CHECK(rig.events.back().detail.find("board_status=busy") != std::string::npos);
  CHECK(rig.driver.counters().acked == 0);
}

TEST_CASE("reset driver: a board without a reset switch is never commanded and its own resets are followed", "[daemon][schedule]") {
  Rig rig(schedule_from(R"({"reset_schedule": {"threshold_fraction": 0.5}})"));
  rig.capabilities = 0;
  for (int i = 0; i < 80; ++i) rig.block(0.7);  // crossing, then retries every 5 s
  CHECK(rig.sent.empty());
  CHECK(rig.count("reset_not_commanded") == 1);  // once per run, not per decision
  CHECK(rig.driver.counters().not_sent >= 2);
  rig.block(0.0, 0.0, status_bit::reset_active);  // the board's own threshold
  const auto st = rig.driver.status();
  CHECK(st["board_reset_switch"] == false);
  CHECK(st["resets_seen"] == 1);
  CHECK(st["board_initiated"] == 1);
  CHECK(st["last_reset"]["why"] == "board");
  CHECK(st["commanded"] == 0);
}

TEST_CASE("reset driver: a reloaded schedule takes over from the next block", "[daemon][schedule]") {
  Rig rig(schedule_from(R"({"reset_schedule": {"interval_s": 100}})"));
  for (int i = 0; i < 30; ++i) rig.block(0.1);
  CHECK(rig.sent.empty());
  rig.driver.reconfigure(schedule_from(R"({"reset_schedule": {"interval_s": 1}})"));
  for (int i = 0; i < 12; ++i) rig.block(0.1);
  REQUIRE(rig.sent.size() == 1);
  CHECK(rig.driver.status()["policy"]["interval_s"] == 1.0);
  rig.driver.reconfigure(schedule_from("{}"));
  for (int i = 0; i < 30; ++i) rig.block(0.9);
  CHECK(rig.driver.counters().commanded == 1);  // no schedule: no new commands (only the first one's resends)
  CHECK(rig.driver.status()["enabled"] == false);
}

// --- Operator commands (ResetDriver::command, the API's reset_now, zero_start, zero_stop) ---

namespace {

// Every outcome `done` was called with, in order.
struct Outcomes {
  std::vector<OperatorResult> got;
  ResetDriver::Reported take() {
    return [this](const OperatorResult& r) { got.push_back(r); };
  }
};

}  // namespace

TEST_CASE("reset driver: an operator reset is sent at once, answered when acked, and counted", "[daemon][schedule][operator]") {
  Rig rig(schedule_from("{}"));  // no schedule: only the operator commands
  rig.block(0.1);
  Outcomes out;
  rig.driver.command(OperatorRequest::reset_now, out.take());
  REQUIRE(rig.sent.size() == 1);  // sent now, not at the next block
  CHECK(rig.sent[0].op == CommandOp::reset_now);
  CHECK(out.got.empty());  // nothing to report before the board answers
  REQUIRE(rig.count("reset_commanded") == 1);
  CHECK(rig.events.back().detail ==
        "reset reason=command request_id=" + std::to_string(rig.sent[0].request_id));
  CHECK(rig.events.back().index == 99);  // the last block's last sample
  rig.commands.on_ack(CommandAck{rig.sent[0].request_id, AckStatus::ok}, rig.now);
  REQUIRE(out.got.size() == 1);
  CHECK(out.got[0].outcome == OperatorOutcome::acknowledged);
  CHECK(out.got[0].request_id == rig.sent[0].request_id);
  CHECK(out.got[0].attempts == 1);
  CHECK(out.got[0].why.empty());
  rig.block(0.0, 0.0, status_bit::reset_active);  // the board discharges
  const auto st = rig.driver.status();
  CHECK(st["last_reset"]["why"] == "command");
  CHECK(st["board_initiated"] == 0);
  CHECK(st["commanded"] == 1);  // with the schedule's, in the board's counts
  CHECK(st["acked"] == 1);
  CHECK(st["operator_commands"] == 1);
  CHECK(st["operator_acked"] == 1);
  CHECK(st["operator_failed"] == 0);
  CHECK(st["operator_not_sent"] == 0);
  CHECK(rig.count("reset_command_failed") == 0);
}

TEST_CASE("reset driver: the operator's zero relay commands, and a board that refuses one", "[daemon][schedule][operator]") {
  Rig rig(schedule_from("{}"));
  rig.block(0.1);
  Outcomes out;
  rig.driver.command(OperatorRequest::zero_relay_on, out.take());
  rig.driver.command(OperatorRequest::zero_relay_off, out.take());
  REQUIRE(rig.sent.size() == 2);
  CHECK(rig.sent[0].op == CommandOp::zero_relay);
  CHECK(rig.sent[0].argument == 1);  // PROTOCOL.md: 1 closes the relay
  CHECK(rig.sent[1].op == CommandOp::zero_relay);
  CHECK(rig.sent[1].argument == 0);
  CHECK(rig.count("zero_relay_commanded") == 2);
  rig.commands.on_ack(CommandAck{rig.sent[1].request_id, AckStatus::busy}, rig.now);  // answered out of order
  rig.commands.on_ack(CommandAck{rig.sent[0].request_id, AckStatus::ok}, rig.now);
  REQUIRE(out.got.size() == 2);
  CHECK(out.got[0].outcome == OperatorOutcome::refused_by_board);
  CHECK(out.got[0].request_id == rig.sent[1].request_id);
  CHECK(out.got[0].board_status == AckStatus::busy);
  CHECK(out.got[0].why == "the board refused request " + std::to_string(rig.sent[1].request_id) + ": busy");
  CHECK(out.got[1].outcome == OperatorOutcome::acknowledged);
  REQUIRE(rig.count("zero_relay_command_failed") == 1);
  CHECK(rig.events.back().detail.find("zero_relay_off reason=command") == 0);
  CHECK(rig.events.back().detail.find("board_status=busy") != std::string::npos);
  const auto& k = rig.driver.counters();
  CHECK(k.zero_commands == 2);
  CHECK(k.zero_failed == 1);
  CHECK(k.commanded == 0);  // resets only
  CHECK(k.operator_commands == 2);
  CHECK(k.operator_acked == 1);
  CHECK(k.operator_failed == 1);
}

TEST_CASE("reset driver: an operator command never acked times out, and one cut by a lost link says so", "[daemon][schedule][operator]") {
  Rig rig(schedule_from("{}"));
  rig.block(0.1);
  Outcomes out;
  rig.driver.command(OperatorRequest::reset_now, out.take());
  for (int i = 0; i < 20 && out.got.empty(); ++i) rig.block(0.1);  // host time on, no ack
  CHECK(rig.sent.size() == 3);  // BoardCommandSettings: 3 attempts
  REQUIRE(out.got.size() == 1);
  CHECK(out.got[0].outcome == OperatorOutcome::timed_out);
  CHECK(out.got[0].attempts == 3);
  CHECK(out.got[0].why.find("did not acknowledge request " + std::to_string(rig.sent[0].request_id) + " after 3 sends") !=
        std::string::npos);
  REQUIRE(rig.count("reset_command_failed") == 1);
  CHECK(rig.driver.counters().failed == 1);
  CHECK(rig.driver.counters().operator_failed == 1);

  rig.driver.command(OperatorRequest::zero_relay_on, out.take());
  REQUIRE(rig.sent.size() == 4);
  rig.commands.abandon_all();  // what the daemon does when the link goes down
  REQUIRE(out.got.size() == 2);
  CHECK(out.got[1].outcome == OperatorOutcome::link_lost);
  CHECK(out.got[1].request_id == rig.sent[3].request_id);
  CHECK(rig.count("zero_relay_command_failed") == 1);
  CHECK(rig.driver.counters().operator_failed == 2);
  CHECK(rig.driver.counters().operator_acked == 0);
}

TEST_CASE("reset driver: the operator is refused at once without the capability or before any block", "[daemon][schedule][operator]") {
  Rig rig(schedule_from("{}"));
  Outcomes out;
  rig.driver.command(OperatorRequest::reset_now, out.take());  // no block yet: capabilities unknown
  REQUIRE(out.got.size() == 1);
  CHECK(out.got[0].outcome == OperatorOutcome::not_sent);
  CHECK(out.got[0].request_id == 0);
  rig.capabilities = capability_bit::zero_relay;  // a relay, no reset switch
  rig.block(0.1);
  rig.driver.command(OperatorRequest::reset_now, out.take());
  rig.driver.command(OperatorRequest::reset_now, out.take());
  REQUIRE(out.got.size() == 3);
  for (std::size_t i : {1u, 2u}) {
    CHECK(out.got[i].outcome == OperatorOutcome::no_capability);
    CHECK(out.got[i].why == "the board has no reset switch");
  }
  CHECK(rig.sent.empty());
  CHECK(rig.count("reset_not_commanded") == 2);  // each operator request, unlike the schedule's once per run
  rig.capabilities = capability_bit::reset_switch;  // and the other way round
  rig.block(0.1);
  rig.driver.command(OperatorRequest::zero_relay_on, out.take());
  REQUIRE(out.got.size() == 4);
  CHECK(out.got[3].outcome == OperatorOutcome::no_capability);
  CHECK(out.got[3].why == "the board has no zero relay");
  CHECK(rig.count("zero_relay_not_commanded") == 1);
  CHECK(rig.sent.empty());
  const auto st = rig.driver.status();
  CHECK(st["operator_not_sent"] == 4);
  CHECK(st["operator_commands"] == 0);
  CHECK(st["not_sent"] == 4);
  CHECK(st["commanded"] == 0);
}

TEST_CASE("reset driver: an operator command beyond the pending limit is not sent", "[daemon][schedule][operator]") {
  Rig rig(schedule_from("{}"));
  rig.block(0.1);
  Outcomes out;
  for (int i = 0; i < 32; ++i) rig.driver.command(OperatorRequest::zero_relay_on, out.take());  // the rig's max_pending
  CHECK(rig.sent.size() == 32);
  CHECK(out.got.empty());
  rig.driver.command(OperatorRequest::reset_now, out.take());
  REQUIRE(out.got.size() == 1);
  CHECK(out.got[0].outcome == OperatorOutcome::not_sent);
  CHECK(out.got[0].why == "too many commands pending");
  CHECK(rig.sent.size() == 32);
  CHECK(rig.events.back().kind == "reset_command_failed");
  CHECK(rig.driver.counters().operator_not_sent == 1);
  CHECK(rig.driver.counters().operator_commands == 32);
  CHECK(rig.driver.counters().commanded == 0);
}

TEST_CASE("reset driver: a calendar time with seconds resets at that second", "[daemon][schedule]") {
  // The rig's blocks start at 1796169600 s, a midnight UTC (1796169600 / 86400 = 20789 exactly).
  Rig rig(schedule_from(R"({"reset_schedule": {"calendar": [{"at": "00:00:05"}]}})"));
  CHECK(rig.driver.status()["policy"]["calendar"][0]["at"] == "00:00:05");
  const auto calendar_resets = [&] {
    int n = 0;
    for (const auto& e : rig.events)
      n += e.kind == "reset_commanded" && e.detail.find("reason=calendar") != std::string::npos;
    return n;
  };
  for (int k = 0; k < 49; ++k) rig.block(0.1);  // board time up to 4.9 s
  CHECK(calendar_resets() == 0);
  REQUIRE(rig.driver.status()["next_reset"].is_object());
  CHECK(rig.driver.status()["next_reset"]["why"] == "calendar");
  for (int k = 0; k < 2; ++k) rig.block(0.1);  // past 5 s
  CHECK(calendar_resets() == 1);
}
