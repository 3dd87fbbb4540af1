// ClientDeadline: when an API client is closed for idling or for leaving a
// request line unfinished (slowloris). Time is injected: every case starts at
// an arbitrary steady-clock epoch and moves it by hand.
#include <catch2/catch.hpp>
#include <chrono>

#include "daemon/api/client_deadline.hpp"

using namespace accrue::daemon::api;
using namespace std::chrono_literals;
using Verdict = ClientDeadline::Verdict;

namespace {
const ClientDeadline::time_point t0 = ClientDeadline::time_point{} + 1000s;
const ClientTimeouts timeouts{60s, 10s};
}  // namespace

TEST_CASE("api client deadline: a client that sends nothing is idle after the idle timeout, not before") {
  ClientDeadline d(timeouts, t0);
  CHECK(d.check(t0 + 59s, false) == Verdict::keep);
  CHECK(d.next_check(t0 + 59s, false) == t0 + 60s);
  CHECK(d.check(t0 + 60s, false) == Verdict::idle);
}

TEST_CASE("api client deadline: each finished request or finished write restarts the idle clock") {
  ClientDeadline d(timeouts, t0);
  d.received(t0 + 50s, true, false);
  CHECK(d.check(t0 + 100s, false) == Verdict::keep);
  CHECK(d.check(t0 + 110s, false) == Verdict::idle);
  d.wrote(t0 + 105s);
  CHECK(d.check(t0 + 110s, false) == Verdict::keep);
  CHECK(d.next_check(t0 + 110s, false) == t0 + 165s);
}

TEST_CASE("api client deadline: a subscriber is never idle, and idles again once it holds none") {
  ClientDeadline d(timeouts, t0);
  CHECK(d.check(t0 + 3600s, true) == Verdict::keep);
  // It is re-checked at least every idle timeout, so an unsubscribe is noticed.
  CHECK(d.next_check(t0 + 3600s, true) == t0 + 3660s);
  CHECK(d.check(t0 + 3600s, false) == Verdict::idle);
}

TEST_CASE("api client deadline: a line dribbled byte by byte is closed at the line timeout though bytes keep coming") {
  ClientDeadline d(timeouts, t0);
  for (int s = 0; s < 10; ++s) {
    d.received(t0 + std::chrono::seconds(s), false, true);
    CHECK(d.check(t0 + std::chrono::seconds(s), false) == Verdict::keep);
  }
  CHECK(d.next_check(t0 + 9s, false) == t0 + 10s);
  CHECK(d.check(t0 + 10s, false) == Verdict::unfinished_line);
  // A subscription does not excuse an unfinished line.
  CHECK(d.check(t0 + 10s, true) == Verdict::unfinished_line);
}

TEST_CASE("api client deadline: the line clock starts with the line's first byte and stops at its newline") {
  ClientDeadline d(timeouts, t0);
  d.received(t0 + 5s, false, true);   // line A begins
  d.received(t0 + 14s, true, true);   // A ends, B begins in the same read
  CHECK(d.check(t0 + 23s, false) == Verdict::keep);
  CHECK(d.check(t0 + 24s, false) == Verdict::unfinished_line);
  d.received(t0 + 20s, true, false);  // B ends, nothing open
  CHECK(d.check(t0 + 79s, false) == Verdict::keep);
  CHECK(d.check(t0 + 80s, false) == Verdict::idle);
}

TEST_CASE("api client deadline: time the daemon stops reading for back-pressure does not count against the line") {
  ClientDeadline d(timeouts, t0);
  d.received(t0, false, true);
  d.pause_reading(t0 + 5s);
  CHECK(d.check(t0 + 30s, false) == Verdict::keep);
  d.wrote(t0 + 40s);  // the client reads its replies meanwhile
  d.resume_reading(t0 + 50s);
  // 5 s before the pause, so 5 s more after it.
  CHECK(d.check(t0 + 54s, false) == Verdict::keep);
  CHECK(d.check(t0 + 55s, false) == Verdict::unfinished_line);
}

TEST_CASE("api client deadline: a client that neither reads its replies nor sends is idle even while paused") {
  ClientDeadline d(timeouts, t0);
  d.received(t0, true, false);
  d.pause_reading(t0);
  CHECK(d.check(t0 + 59s, false) == Verdict::keep);
  CHECK(d.check(t0 + 60s, false) == Verdict::idle);
}
