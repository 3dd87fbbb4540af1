#include <catch2/catch.hpp>

#include <string>
#include <vector>

#include "daemon/board_commands.hpp"
#include "daemon/options.hpp"
#include "daemon/reset_driver.hpp"
#include "protocol/messages.hpp"

using namespace accrue::daemon;
namespace status_bit = accrue::protocol::status_bit;
namespace capability_bit = accrue::protocol::capability_bit;
using accrue::protocol::AckStatus;
using accrue::protocol::BoardCommand;
using accrue::protocol::CommandAck;
using accrue::protocol::CommandOp;

namespace {

ResetSchedule schedule_from(const std::string& text) {
  DaemonConfig c;
  const auto errors = load_config_text(text, c);
  REQUIRE(errors.empty());
  return c.reset_schedule;
}

// A board of two channels behind a real BoardCommands: commands sent are kept
// in `sent`; the test acks them (or not) and says when the board resets.
struct Rig {
  std::vector<BoardCommand> sent;
  struct Ev {
    std::string kind, detail;
    std::uint64_t index;
  };
  std::vector<Ev> events;
  double now = 1796169600.0;  // host clock for BoardCommands (2026-12-02T00:00:00Z)
  BoardCommands commands{BoardCommandSettings{0.5, 3, 32}, [this](const BoardCommand& c) { sent.push_back(c); }};
  ResetDriver driver;
  std::uint8_t capabilities = capability_bit::reset_switch | capability_bit::zero_relay;
  std::int64_t run_id = 1;
  std::uint64_t index = 0;

  explicit Rig(ResetSchedule s)
      : driver(
            std::move(s),
            [this](CommandOp op, std::uint32_t arg, ResetDriver::Done done) {
              return commands.submit(op, arg, now, std::move(done));
            },
            [this](const std::string& k, const std::string& d, std::uint64_t i) { events.push_back({k, d, i}); }) {}

  // One block of 100 samples at 1 ms (0.1 s of board time).
  void block(double level0, double level1 = 0.0, std::uint8_t status = 0) {
    index += 100;
    BlockObservation b;
    b.run_id = run_id;
    b.last_index = index - 1;
    b.board_time_s = double(b.last_index) * 1e-3;
    b.utc = 1796169600.0 + b.board_time_s;
    b.status = status;
    b.capabilities = capabilities;
    b.level_fraction = {level0, level1};
    b.full_scale_v = {10.0, 10.0};
    driver.observe(b);
    now += 0.1;
    commands.tick(now);
  }
  int count(const std::string& kind) const {
    int n = 0;
    for (const auto& e : events) n += e.kind == kind;
    return n;
  }
};

}  // namespace

TEST_CASE("reset driver: the config's schedule maps onto the scheduler's settings", "[daemon][schedule]") {
  const auto s = scheduler_settings(schedule_from(R"({"reset_schedule": {
      "interval_s": 120, "threshold_fraction": 0.8, "threshold_hysteresis": 0.1,
      "calendar": [{"at": "03:30", "days": ["mon", "sun"], "zero_window_s": 60}, {"at": "23:59"}]}})"));
  CHECK(s.interval_s == 120.0);
  CHECK(s.threshold_fraction == 0.8);
  CHECK(s.rearm_fraction == Approx(0.7));  // re-armed 0.1 of full scale below the threshold
  CHECK(s.full_scale_v == 1.0);            // the driver passes levels as fractions of full scale
  REQUIRE(s.calendar.size() == 2);
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
