#include <catch2/catch.hpp>

#include "protocol/sequence_tracker.hpp"

using namespace accrue::protocol;

TEST_CASE("sequence tracker: contiguous blocks, a gap with its exact missing count, a reboot", "[protocol]") {
  SequenceTracker t;
  CHECK(t.on_block(0, 100).outcome == SequenceOutcome::first);
  CHECK(t.on_block(100, 100).outcome == SequenceOutcome::continuous);
  const auto gap = t.on_block(450, 50);  // 200..449 never arrived
  CHECK(gap.outcome == SequenceOutcome::gap);
  CHECK(gap.missing_samples == 250);
  CHECK(t.on_block(500, 10).outcome == SequenceOutcome::continuous);
  CHECK(t.on_block(3, 10).outcome == SequenceOutcome::reboot);  // went back: the board restarted
  CHECK(t.on_block(13, 10).outcome == SequenceOutcome::continuous);
  CHECK(t.counters().gaps == 1);
  CHECK(t.counters().missing_samples == 250);
  CHECK(t.counters().reboots == 1);
}

TEST_CASE("sequence tracker: after restart the next block starts a session, whatever its index", "[protocol]") {
  SequenceTracker t;
  t.on_block(1000, 10);
  t.restart();
  CHECK(t.on_block(0, 10).outcome == SequenceOutcome::first);
  CHECK(t.counters().reboots == 0);
}
