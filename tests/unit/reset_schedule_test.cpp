#include <catch2/catch.hpp>

#include <cmath>
#include <cstdint>
#include <string>
#include <vector>

#include "daemon/chain/reset_schedule.hpp"
#include "protocol/messages.hpp"

using namespace accrue::chain;
namespace status_bit = accrue::protocol::status_bit;

namespace {

// Drives a scheduler with one observation per `step_s` of board time, with a
// board that obeys: a reset asked for is seen as reset_active in the next
// observation (one step long), a zero relay asked closed stays closed until
// asked open. Records every decision with the board time it was made.
struct Harness {
  ResetScheduler scheduler;
  double utc0 = 1796169600.0;  // 2026-12-02T00:00:00Z, a Wednesday (checked with Python's datetime)
  double t = 0.0;
  std::int64_t t_us = 0;  // board time kept in whole microseconds, so 100 steps of 0.1 s make exactly 10 s
  bool board_obeys = true;
  bool reset_next = false, zero = false;
  struct Seen {
    double t;
    ScheduleDecision decision;
    std::string reason;
  };
  std::vector<Seen> seen;

  explicit Harness(ResetScheduleSettings s) : scheduler(std::move(s)) {}
  void step(double step_s, double v, std::uint8_t extra_status = 0) {
    std::uint8_t status = extra_status;
    if (reset_next) status |= status_bit::reset_active;
    if (zero) status |= status_bit::zero_relay;
    reset_next = false;
    std::vector<ScheduleAction> out;
    scheduler.observe(t, utc0 + t, v, status, out);
    for (const auto& a : out) {
      seen.push_back({t, a.decision, a.reason});
      if (!board_obeys) continue;
      if (a.decision == ScheduleDecision::reset_now) reset_next = true;
      if (a.decision == ScheduleDecision::zero_relay_on) zero = true;
      if (a.decision == ScheduleDecision::zero_relay_off) zero = false;
    }
    t_us += std::llround(step_s * 1e6);
    t = double(t_us) * 1e-6;
  }
  std::vector<Seen> resets() const {
    std::vector<Seen> r;
    for (const auto& s : seen)
      if (s.decision == ScheduleDecision::reset_now) r.push_back(s);
    return r;
  }
};

}  // namespace

TEST_CASE("reset_schedule: weekday and second of day in UTC", "[chain][schedule]") {
  // 1970-01-01 was a Thursday, 2000-01-01 a Saturday, 2026-12-07 a Monday
  // (calendar facts; the Unix times from Python's datetime with tzinfo=UTC).
  CHECK(ResetScheduler::weekday_utc(0.0) == 3);
  CHECK(ResetScheduler::weekday_utc(946684800.0) == 5);
  CHECK(ResetScheduler::weekday_utc(1796614200.0) == 0);
  CHECK(ResetScheduler::second_of_day_utc(1796614200.0) == 3 * 3600 + 30 * 60);
  CHECK(ResetScheduler::weekday_utc(-1.0) == 2);  // the second before the epoch: Wednesday 23:59:59
  CHECK(ResetScheduler::second_of_day_utc(-1.0) == 86399);
}

TEST_CASE("reset_schedule: interval resets follow the board's resets, not the requests", "[chain][schedule]") {
  ResetScheduleSettings s;
  s.interval_s = 10.0;
  Harness h(s);
  for (int i = 0; i < 280; ++i) h.step(0.125, 0.1);  // 35 s (steps exact in binary)
  const auto r = h.resets();
  REQUIRE(r.size() == 3);
  CHECK(r[0].reason == "interval");
  CHECK(r[0].t == Approx(10.0));
  // The board resets one step after the request; the next interval counts from that.
  CHECK(r[1].t == Approx(20.125));
  CHECK(r[2].t == Approx(30.25));
  CHECK(h.scheduler.resets_asked() == 3);
}

TEST_CASE("reset_schedule: a board resetting on its own restarts the interval", "[chain][schedule]") {
  ResetScheduleSettings s;
  s.interval_s = 10.0;
  Harness h(s);
  for (int i = 0; i < 56; ++i) h.step(0.125, 0.1);   // to 7 s
  h.step(0.125, 0.0, status_bit::reset_active);      // the board's own reset at 7.0 s
  for (int i = 0; i < 96; ++i) h.step(0.125, 0.1);   // to 19.125 s
  const auto r = h.resets();
  REQUIRE(r.size() == 1);
  CHECK(r[0].t == Approx(17.0));
}

TEST_CASE("reset_schedule: an unanswered reset is asked again after the command timeout", "[chain][schedule]") {
  ResetScheduleSettings s;
  s.interval_s = 10.0;
  s.command_timeout_s = 2.0;
  Harness h(s);
  h.board_obeys = false;
  for (int i = 0; i <= 120; ++i) h.step(0.125, 0.1);
  const auto r = h.resets();
  REQUIRE(r.size() == 3);
  CHECK(r[0].reason == "interval");
  CHECK(r[1].reason == "retry");
  CHECK(r[1].t == Approx(12.0));
  CHECK(r[2].t == Approx(14.0));
}

TEST_CASE("reset_schedule: threshold with hysteresis fires once per crossing, not on noise", "[chain][schedule]") {
  ResetScheduleSettings s;
  s.full_scale_v = 10.0;
  s.threshold_fraction = 0.8;  // 8 V
  s.rearm_fraction = 0.7;      // 7 V
  Harness h(s);
  h.board_obeys = false;  // the output stays where the test puts it
  for (double v = 0.0; v < 7.95; v += 0.05) h.step(0.1, -v);  // a negative ramp: |V| counts
  CHECK(h.resets().empty());
  // Noise around the level: 7.9, 8.1, 7.9, 8.1 ... one request only.
  for (int i = 0; i < 40; ++i) h.step(0.1, i % 2 ? -8.1 : -7.9);
  REQUIRE(h.resets().size() == 1);
  CHECK(h.resets()[0].reason == "threshold");
  // A reset seen re-arms at once: the next observation (a whole block later)
  // may already be between the levels, and the crossing after it must count.
  ResetScheduleSettings s2 = s;
  s2.command_timeout_s = 1e9;
  Harness g(s2);
  g.board_obeys = false;
  g.step(0.1, 8.5);
  g.step(0.1, 0.0, status_bit::reset_active);
  g.step(0.1, 7.5);
  g.step(0.1, 8.3);
  REQUIRE(g.resets().size() == 2);
  CHECK(g.resets()[1].reason == "threshold");
}

TEST_CASE("reset_schedule: daily and weekly calendar times in UTC, with a zero window", "[chain][schedule]") {
  ResetScheduleSettings s;
  CalendarEntry daily;
  daily.second_of_day_utc = 12 * 3600;  // 12:00 UTC every day
  CalendarEntry weekly;
  weekly.second_of_day_utc = 3 * 3600 + 30 * 60;  // 03:30 UTC on Mondays, with a 60 s zero window
  weekly.weekdays = 0x01;
  weekly.zero_window_s = 60.0;
  s.calendar = {daily, weekly};
  Harness h(s);
  // A week from Wednesday 2026-12-02 00:00 UTC, one observation every 10 s.
  for (int i = 0; i < 7 * 8640; ++i) h.step(10.0, 0.1);
  std::vector<double> daily_at, zero_on_at, zero_off_at, after_zero_at;
  for (const auto& e : h.seen) {
    if (e.decision == ScheduleDecision::reset_now && e.reason == "calendar") {
      // A reset right after a zero window belongs to it; the rest are the daily ones.
      if (!zero_off_at.empty() && e.t == zero_off_at.back()) after_zero_at.push_back(e.t);
      else daily_at.push_back(e.t);
    }
    if (e.decision == ScheduleDecision::zero_relay_on) zero_on_at.push_back(e.t);
    if (e.decision == ScheduleDecision::zero_relay_off) zero_off_at.push_back(e.t);
  }
  REQUIRE(daily_at.size() == 7);
  for (std::size_t d = 0; d < 7; ++d) CHECK(daily_at[d] == Approx(double(d) * 86400 + 12 * 3600));
  // Monday 2026-12-07 03:30:00Z is 5 days and 3.5 hours after the start.
  const double monday = 5 * 86400.0 + 3.5 * 3600;
  REQUIRE(zero_on_at.size() == 1);
  CHECK(zero_on_at[0] == Approx(monday));
  REQUIRE(zero_off_at.size() == 1);
  CHECK(zero_off_at[0] == Approx(monday + 60.0));
  REQUIRE(after_zero_at.size() == 1);  // the next segment starts from a discharged capacitor
  // No interval or threshold was set: nothing else asked.
  CHECK(h.resets().size() == 8);
}

TEST_CASE("reset_schedule: resets and zero windows on command", "[chain][schedule]") {
  ResetScheduleSettings s;
  s.min_spacing_s = 5.0;
  Harness h(s);
  h.step(1.0, 0.0);
  h.scheduler.request_reset();
  h.step(1.0, 0.0);
  REQUIRE(h.resets().size() == 1);
  CHECK(h.resets()[0].reason == "command");
  h.step(1.0, 0.0);  // the board resets here
  // Asked again 1 s later: refused by min_spacing_s and counted, not queued for ever.
  h.scheduler.request_reset();
  h.step(1.0, 0.0);
  CHECK(h.resets().size() == 1);
  CHECK(h.scheduler.resets_refused() == 1);
  h.scheduler.request_zero_window(30.0);
  for (int i = 0; i < 40; ++i) h.step(1.0, 0.0);
  int on = 0, off = 0;
  for (const auto& e : h.seen) {
    on += e.decision == ScheduleDecision::zero_relay_on;
    off += e.decision == ScheduleDecision::zero_relay_off;
  }
  CHECK(on == 1);
  CHECK(off == 1);
  CHECK_FALSE(h.scheduler.in_zero_window());
}

TEST_CASE("reset_schedule: a threshold crossing inside the minimum spacing is asked once the spacing allows",
          "[chain][schedule]") {
  ResetScheduleSettings s;
  s.threshold_fraction = 0.8;
  s.min_spacing_s = 5.0;
  Harness h(s);
  h.board_obeys = false;
  h.step(1.0, 8.5);                            // t = 0: asked
  h.step(1.0, 0.0, status_bit::reset_active);  // t = 1: the board discharges
  h.step(1.0, 1.0);                            // re-armed
  for (int i = 0; i < 6; ++i) h.step(1.0, 8.5);  // t = 3..8: over the threshold at once (a fast input)
  const auto r = h.resets();
  REQUIRE(r.size() == 2);
  CHECK(r[1].reason == "threshold");
  CHECK(r[1].t == Approx(6.0));  // the first observation 5 s after the reset at t = 1
  CHECK(h.scheduler.resets_refused() == 3);  // t = 3, 4, 5
}
