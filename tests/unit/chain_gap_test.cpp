// ChannelChain::on_missing_samples: samples lost in a sample-index gap may hide
// a reset; the chain must end the segment there and estimate the gap, not
// stitch the output's jump as charge. Data: the simulator's board (invented
// scenario), with every reset-active block taken out of the stream.
#include <catch2/catch.hpp>

#include <cmath>

#include "daemon/chain/channel_chain.hpp"
#include "protocol/decoder.hpp"
#include "protocol/sequence_tracker.hpp"
#include "tools/accrue-sim/board_model.hpp"

using namespace accrue;

namespace {

struct Result {
  chain::TotalSnapshot total;
  double truth_c = 0;
  std::uint64_t resets = 0, gaps = 0, missing = 0;
  double i_max_a = 0;
};

// `mark_gaps`: tell the chain about each gap (what ingest does) or not.
Result run(bool mark_gaps) {
  sim::Scenario s;
  s.duration_s = 60.0;
  s.zero_window_s = 5.0;
  s.beam.start_s = 6.0;
  s.beam.stop_s = 60.0;
  s.beam.current_a = 2e-9;  // about one reset every 6 s
  s.samples_per_block = 100;
  sim::BoardModel board(s);
  std::vector<std::uint8_t> bytes;
  while (board.produce(1 << 16, bytes)) {
  }
  protocol::Decoder d;
  std::vector<protocol::Message> msgs;
  d.feed(bytes, msgs);

  const auto id = board.identity();
  chain::Calibration cal;
  cal.adc.bits = id.adc_bits;
  cal.adc.full_scale_v = id.full_scale_v;
  cal.adc.bipolar = true;
  cal.front_end.c_farad = id.c_farad;
  cal.front_end.r1_ohm = id.r1_ohm;
  chain::ChainSettings settings;
  settings.sample_period_s = id.sample_period_s;
  chain::ChannelChain chain(cal, settings);
  chain::ChainOutput out;
  protocol::SequenceTracker seq;
  Result r;
  for (const auto& m : msgs) {
    const auto* b = std::get_if<protocol::SampleBlock>(&m);
    if (!b) continue;
    // The reset blocks are lost on the wire: the board's resets go unseen.
    if (b->status & protocol::status_bit::reset_active) continue;
    const auto sr = seq.on_block(b->first_index, b->samples_per_channel);
    if (sr.outcome == protocol::SequenceOutcome::gap) {
      ++r.gaps;
      r.missing += sr.missing_samples;
      if (mark_gaps) chain.on_missing_samples(out);
    }
    chain.process(b->first_index, b->status, b->codes.data(), b->samples_per_channel, 1, out);
  }
  chain.finish(out);
  r.total = chain.snapshot();
  r.truth_c = double(board.truth().charge_c);
  r.resets = board.truth().resets;
  r.i_max_a = s.beam.current_a * (1 + s.beam.modulation);
  return r;
}

}  // namespace

TEST_CASE("chain: a reset lost in a sample gap ends the segment and is estimated, not stitched as a step",
          "[chain][gaps]") {
  const Result r = run(true);
  REQUIRE(r.resets >= 5);
  CHECK(r.gaps == r.resets);   // one gap per hidden reset
  CHECK(r.missing == r.resets);  // each reset lasts one 1 ms sample (reset_s)
  // Tolerance as tests/e2e/total_matches_truth.sh: 4 stated standard
  // uncertainties plus, per dead interval (gap + settle + a sample), half the
  // largest input current times its length.
  const double gap_bound = double(r.resets) * 0.5 * r.i_max_a * (0.001 + 0.002 + 0.001);
  const double err = std::fabs(r.total.total - r.truth_c);
  INFO("total " << r.total.total << " C, truth " << r.truth_c << " C, u " << r.total.std_uncertainty);
  CHECK(err <= 4 * r.total.std_uncertainty + gap_bound);
}

TEST_CASE("chain: without the gap mark, the hidden resets are summed as steps of the output (why ingest marks gaps)",
          "[chain][gaps]") {
  const Result r = run(false);
  // Each hidden reset drops the output by ~8 V: with C = 1 nF that is ~8 nC of
  // false negative charge per reset, far outside any tolerance.
  const double err = r.total.total - r.truth_c;
  CHECK(std::fabs(err) > 4e-9 * double(r.resets));
}
