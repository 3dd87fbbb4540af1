// Chain kernel benchmark: decode + counts->volts + baseline + integrate for one
// 24-bit channel, measured beside the practical limit, a plain loop that only
// decodes and sums the same frames. Run: tools/bench/run.sh (see RESULTS.md).
#include <benchmark/benchmark.h>

#include <vector>

#include "daemon/chain/channel_chain.hpp"
#include "protocol/decoder.hpp"
#include "protocol/encoder.hpp"
#include "protocol/frame.hpp"
#include "tools/accrue-sim/board_model.hpp"

namespace {

using namespace accrue;

// One simulated minute of the demo scenario's frames (60 000 samples, resets included).
const std::vector<std::uint8_t>& frames() {
  static const std::vector<std::uint8_t> bytes = [] {
    sim::Scenario s;
    s.duration_s = 60.0;
    s.zero_window_s = 5.0;
    s.beam.start_s = 6.0;
    s.beam.current_a = 2e-9;  // a strong beam so the minute holds several resets
    s.samples_per_block = 1000;
    sim::BoardModel board(s);
    std::vector<std::uint8_t> out;
    while (board.produce(1 << 20, out)) {
    }
    return out;
  }();
  return bytes;
}

constexpr std::int64_t kSamples = 60000;

void BM_decode_and_sum(benchmark::State& state) {
  const auto& bytes = frames();
  std::vector<protocol::Message> messages;
  for (auto _ : state) {
    protocol::Decoder decoder;
    messages.clear();
    decoder.feed(bytes, messages);
    std::int64_t sum = 0;
    for (const auto& m : messages)
      if (auto* b = std::get_if<protocol::SampleBlock>(&m))
        for (std::int32_t c : b->codes) sum += c;
    benchmark::DoNotOptimize(sum);
  }
  state.SetItemsProcessed(state.iterations() * kSamples);
}

void BM_decode_and_chain(benchmark::State& state) {
  const auto& bytes = frames();
  std::vector<protocol::Message> messages;
  chain::Calibration cal;
  chain::ChainSettings settings;
  chain::ChainOutput out;
  for (auto _ : state) {
    protocol::Decoder decoder;
    chain::ChannelChain chain(cal, settings);
    messages.clear();
    out.clear();
    decoder.feed(bytes, messages);
    for (const auto& m : messages)
      if (auto* b = std::get_if<protocol::SampleBlock>(&m))
        chain.process(b->first_index, b->status, b->codes.data(), b->samples_per_channel, b->channel_count, out);
    chain.finish(out);
    benchmark::DoNotOptimize(chain.snapshot().total);
  }
  state.SetItemsProcessed(state.iterations() * kSamples);
}

BENCHMARK(BM_decode_and_sum)->Unit(benchmark::kMicrosecond)->Repetitions(5)->ReportAggregatesOnly(true);
BENCHMARK(BM_decode_and_chain)->Unit(benchmark::kMicrosecond)->Repetitions(5)->ReportAggregatesOnly(true);

}  // namespace

BENCHMARK_MAIN();
