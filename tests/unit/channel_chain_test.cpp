#include <catch2/catch.hpp>

#include <cmath>
#include <vector>

#include "daemon/chain/channel_chain.hpp"
#include "protocol/messages.hpp"

using namespace accrue::chain;
namespace status_bit = accrue::protocol::status_bit;
using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;

namespace {

// Feeds a noise-free synthetic integrator output to a chain, in blocks that
// share one status, the way a board sends them.
struct SyntheticBoard {
  double dt = 1e-3;
  double drift_v_per_s = 1e-3;
  double input_v_per_s = -0.1;  // 100 pA into 1 nF
  double pedestal_v = 5e-3;
  Calibration cal;
  ChannelChain chain;
  ChainOutput out;
  std::uint64_t index = 0;
  double v = 0.0;

  SyntheticBoard() : chain(cal, settings()) {}
  ChainSettings settings() const {
    ChainSettings s;
    s.sample_period_s = dt;
    return s;
  }
  std::int32_t code(double volts) const { return std::int32_t(std::lround(volts / cal.adc.volts_per_code())); }
  void run(std::uint64_t samples, std::uint8_t status, double rate_v_per_s) {
    std::vector<std::int32_t> codes;
    for (std::uint64_t k = 0; k < samples; ++k) {
      codes.push_back(code(v));
      v += rate_v_per_s * dt;
    }
    chain.process(index, status, codes.data(), codes.size(), 1, out);
    index += samples;
  }
  // A reset of `samples` samples: the first is converted as the switch
  // closes (PROTOCOL.md §3.2) and shows the undischarged output, the rest 0.
  void reset(std::uint64_t samples) {
    std::vector<std::int32_t> codes(samples, code(0.0));
    codes[0] = code(v);
    chain.process(index, status_bit::reset_active, codes.data(), codes.size(), 1, out);
    index += samples;
    v = pedestal_v;
  }
};

}  // namespace

TEST_CASE("channel_chain: drift fitted on the zero window and resets stitched", "[chain][segments]") {
  SyntheticBoard b;
  b.run(10000, status_bit::zero_relay, b.drift_v_per_s);  // 10 s zero window: drift only
  const std::uint64_t first_live = b.index + 2;               // settle_s = 2 ms = 2 samples
  const double rate = b.input_v_per_s + b.drift_v_per_s;
  for (int segment = 0; segment < 5; ++segment) {
    b.run(20000, 0, rate);
    b.reset(1);
  }
  b.run(20000, 0, rate);
  b.chain.finish(b.out);

  REQUIRE(b.out.baselines.size() == 1);
  CHECK_THAT(b.out.baselines[0].slope_v_per_s, WithinRel(b.drift_v_per_s, 1e-3));
  REQUIRE(b.out.segments.size() == 6);
  // Truth: the input integrated from the first integrated sample to the last,
  // dead times included (the input flows while C is shorted; the chain must
  // estimate that part). Q = -C * dV (charge amplifier).
  const double seconds = double(b.index - 1 - first_live) * b.dt;
  const double true_q = -b.cal.front_end.c_farad * b.input_v_per_s * seconds;
  const TotalSnapshot t = b.chain.snapshot();
  // Tolerance: 24-bit quantisation (1.2 uV per reading, a few readings per
  // segment end) on a 5.2 V total change: 1e-5 relative is generous.
  CHECK_THAT(t.total, WithinRel(true_q, 1e-5));
  CHECK(t.segments == 6);
  CHECK((t.flags & segment_flag::gap_estimated) != 0);
  // Every segment after the first carries its gap estimate; the total is their running sum.
  double running = 0.0;
  for (const auto& s : b.out.segments) {
    running += s.quantity;
    CHECK_THAT(s.total_after, WithinRel(running, 1e-12));
    // After a reset each segment starts from the pedestal plus what the input
    // added during the 2 settle samples (0.2 mV at most here).
    if (s.ordinal > 1) CHECK_THAT(s.start_v, WithinAbs(b.pedestal_v, 3e-4));
  }
  CHECK(b.out.segments[0].gap_before_v == 0.0);
  CHECK(b.out.segments[1].gap_before_v != 0.0);
}

TEST_CASE("channel_chain: without a zero window drift is not removed and the total says so", "[chain][segments]") {
  SyntheticBoard b;
  b.run(20000, 0, b.input_v_per_s + b.drift_v_per_s);
  b.chain.finish(b.out);
  const TotalSnapshot t = b.chain.snapshot();
  CHECK((t.flags & segment_flag::no_baseline) != 0);
  // The drift then stays in the total: (input + drift) * T * (-C).
  const double seconds = 19999 * b.dt;
  CHECK_THAT(t.total, WithinRel(-b.cal.front_end.c_farad * (b.input_v_per_s + b.drift_v_per_s) * seconds, 1e-5));
}

TEST_CASE("channel_chain: an output near the rails marks the segment clipped", "[chain][saturation]") {
  SyntheticBoard b;
  b.v = 9.7;  // 0.98 of the 10 V full scale is the default clip level
  b.run(1000, 0, 0.2);
  b.chain.finish(b.out);
  REQUIRE(b.out.segments.size() == 1);
  CHECK((b.out.segments[0].flags & segment_flag::clipped) != 0);
}

TEST_CASE("channel_chain: a resumed state continues the same total", "[chain][resume]") {
  SyntheticBoard a;
  a.run(5000, status_bit::zero_relay, a.drift_v_per_s);
  a.run(20000, 0, a.input_v_per_s + a.drift_v_per_s);
  a.chain.finish(a.out);
  const TotalSnapshot before = a.chain.snapshot();

  // A second chain (the daemon after a restart) picks up the stored state;
  // a further segment adds to the same total with its gap estimated.
  ChannelChain resumed(a.cal, a.settings());
  resumed.resume(before.state);
  ChainOutput out;
  std::vector<std::int32_t> codes;
  double v = 0.5;
  for (int k = 0; k < 10000; ++k, v += (a.input_v_per_s + a.drift_v_per_s) * a.dt) codes.push_back(a.code(v));
  resumed.process(a.index + 100, 0, codes.data(), codes.size(), 1, out);
  resumed.finish(out);
  const TotalSnapshot after = resumed.snapshot();
  REQUIRE(out.segments.size() == 1);
  CHECK(after.segments == before.segments + 1);
  CHECK_THAT(after.total, WithinRel(before.total + out.segments[0].quantity, 1e-12));
  // 100 samples of dead time plus the 2 settle samples, at the input rate.
  const double expected_gap_v = a.input_v_per_s * double(100 + 2 + 1) * a.dt;
  CHECK_THAT(out.segments[0].gap_before_v, WithinRel(expected_gap_v, 1e-3));
}

TEST_CASE("channel_chain: a quiet window added while running feeds the baseline", "[chain][baseline][quiet]") {
  SyntheticBoard b;
  const double rate = b.input_v_per_s + b.drift_v_per_s;
  b.run(10000, 0, rate);  // no zero window yet: the chain has no baseline
  // The user marks [5000, 30000] quiet: the first half is behind the chain,
  // so the fit starts at the next sample.
  const auto used_from = b.chain.add_quiet_window({5000, 29999});
  REQUIRE(used_from);
  CHECK(*used_from == 10000);
  CHECK_FALSE(b.chain.add_quiet_window({0, 9999}));  // wholly in the past
  b.run(20000, 0, b.drift_v_per_s);  // the input really is off: drift only
  b.run(20000, 0, rate);
  b.chain.finish(b.out);

  REQUIRE(b.out.baselines.size() == 1);
  CHECK(b.out.baselines[0].quiet_window);
  CHECK_THAT(b.out.baselines[0].slope_v_per_s, WithinRel(b.drift_v_per_s, 1e-3));
  // Truth: the input ran for 10000 + 19999 sample steps (see SyntheticBoard::run);
  // Q = -C * dV. Without the drift removed the total would be 1.7 % off.
  const double true_q = -b.cal.front_end.c_farad * b.input_v_per_s * b.dt * (10000 + 19999);
  const TotalSnapshot t = b.chain.snapshot();
  CHECK((t.flags & segment_flag::no_baseline) == 0);
  CHECK_THAT(t.total, WithinRel(true_q, 1e-4));
}

TEST_CASE("channel_chain: the first sample of a reset or zero-relay block ends the open segment",
          "[chain][segments]") {
  // PROTOCOL.md §3.2: the switch closes just after that sample is converted.
  SyntheticBoard b;
  const double rate = b.input_v_per_s + b.drift_v_per_s;
  b.run(1000, 0, rate);
  const std::uint64_t reset_at = b.index;
  const double undischarged_v = b.v;
  b.reset(3);
  b.run(1000, 0, rate);
  const std::uint64_t zero_at = b.index;
  b.run(500, status_bit::zero_relay, b.drift_v_per_s);
  b.run(1000, 0, rate);
  b.chain.finish(b.out);

  REQUIRE(b.out.segments.size() == 3);
  CHECK(b.out.segments[0].last_index == reset_at);
  CHECK_THAT(b.out.segments[0].end_v, WithinAbs(undischarged_v, 1e-5));
  // The dead time runs from that sample to the first one integrated after the
  // reset: the two further reset samples and the 2 settle samples.
  CHECK(b.out.segments[1].first_index == reset_at + 3 + 2);
  CHECK(b.out.segments[1].last_index == zero_at);
  // The zero window's fit starts after the sample that closed the segment.
  REQUIRE(b.out.baselines.size() == 1);
  CHECK(b.out.baselines[0].first_index == zero_at + 1);
  CHECK(b.out.baselines[0].last_index == zero_at + 499);
}

TEST_CASE("channel_chain: a dead time next to a change of input takes the level of the far side",
          "[chain][segments][gap]") {
  // The gap here is 5 intervals: the edge sample, 2 more reset samples, 2 settle samples.
  const double gap_s = 5e-3;
  SECTION("the input starts inside the last interval before the reset") {
    SyntheticBoard b;
    b.run(1000, 0, b.drift_v_per_s);              // input off
    b.v += 0.7 * b.input_v_per_s * b.dt;          // on from 30 % into the last interval
    b.reset(3);
    b.run(1000, 0, b.input_v_per_s + b.drift_v_per_s);
    b.chain.finish(b.out);
    REQUIRE(b.out.segments.size() == 2);
    // No baseline: the gap estimate is the plain rate times the gap. The mean
    // of the two rates would be 15 % of the input short.
    CHECK_THAT(b.out.segments[1].gap_before_v, WithinRel((b.input_v_per_s + b.drift_v_per_s) * gap_s, 1e-3));
  }
  SECTION("the input stops inside the first interval after the reset") {
    SyntheticBoard b;
    b.run(1000, 0, b.input_v_per_s + b.drift_v_per_s);
    b.reset(3);
    b.run(2, 0, 0.0);  // the settle samples (not integrated)
    // The input flows for 30 % of the first live interval, then stops.
    b.run(1, 0, 0.3 * b.input_v_per_s + b.drift_v_per_s);
    b.run(1000, 0, b.drift_v_per_s);
    b.chain.finish(b.out);
    REQUIRE(b.out.segments.size() == 2);
    CHECK_THAT(b.out.segments[1].gap_before_v, WithinRel((b.input_v_per_s + b.drift_v_per_s) * gap_s, 1e-3));
  }
}
