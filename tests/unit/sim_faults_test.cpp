// Simulator fault injection fed through the real decoder and sequence tracker:
// every counter a receiver keeps must equal what the injector says it did.
#include <catch2/catch.hpp>

#include <random>

#include "daemon/clock_model.hpp"
#include "protocol/decoder.hpp"
#include "protocol/sequence_tracker.hpp"
#include "tools/accrue-sim/board_model.hpp"
#include "tools/accrue-sim/faults.hpp"

using namespace accrue;

namespace {

// A short invented scenario: 4 channels, a strong beam so resets happen,
// small blocks so there are many frames to hit.
sim::Scenario small_scenario(double duration_s = 60.0) {
  sim::Scenario s;
  s.duration_s = duration_s;
  s.zero_window_s = 2.0;
  s.beam.start_s = 3.0;
  s.beam.stop_s = duration_s;
  s.beam.current_a = 2e-9;
  s.channel_count = 4;
  s.samples_per_block = 100;
  return s;
}

struct Stream {
  std::vector<std::uint8_t> bytes;
  sim::FaultCounts counts;
  sim::Truth truth;
  std::size_t stall_offset = SIZE_MAX;
};

// Runs the board to the end through an injector. `pull_at_s`: board times at
// which the cable is out for the scenario's cable_pull_s (as accrue-sim does).
Stream run(const sim::Scenario& s, bool with_injector = true) {
  sim::BoardModel board(s);
  sim::FaultInjector injector(s.faults, true);
  if (with_injector) board.set_injector(&injector);
  Stream st;
  std::vector<double> pulls = s.faults.cable_pull_at_s;
  std::size_t next_pull = 0;
  bool stall_due = s.faults.stall_at_s >= 0;
  std::vector<std::uint8_t> discard;
  for (;;) {
    const double next_s = std::min(next_pull < pulls.size() ? pulls[next_pull] : HUGE_VAL,
                                   stall_due ? s.faults.stall_at_s : HUGE_VAL);
    if (next_s <= board.true_time_s()) {
      if (stall_due && s.faults.stall_at_s <= board.true_time_s()) {
        injector.stall_next_block();
        stall_due = false;
      } else {
        ++next_pull;
        injector.set_cable_out(true);
        board.produce(std::uint64_t(std::llround(s.faults.cable_pull_s / s.sample_period_s)), discard);
        injector.set_cable_out(false);
      }
      continue;
    }
    std::uint64_t n = 4096;
    if (next_s < HUGE_VAL) n = std::min<std::uint64_t>(n, std::uint64_t(std::ceil((next_s - board.true_time_s()) / board.true_period_s())));
    const std::size_t before = st.bytes.size();
    const bool more = board.produce(n, st.bytes);
    std::size_t cut = 0;
    if (injector.take_stall(cut)) st.stall_offset = before + cut;
    if (!more) break;
  }
  REQUIRE(discard.empty());
  st.counts = injector.counts();
  st.truth = board.truth();
  return st;
}

struct Received {
  protocol::DecoderCounters decoder;
  protocol::SequenceCounters sequence;
  std::uint64_t samples = 0;  // per channel
  std::uint64_t identities = 0;
  std::uint64_t stream_ends = 0;
};

// What the daemon's ingest does with the stream, minus the chain: decode in
// uneven chunks, follow the sample index per session.
Received receive(const std::vector<std::uint8_t>& bytes, std::size_t chunk = 997) {
  protocol::Decoder d;
  protocol::SequenceTracker seq;
  std::vector<protocol::Message> msgs;
  Received r;
  auto handle = [&] {
    for (const auto& m : msgs) {
      if (std::holds_alternative<protocol::BoardIdentity>(m)) ++r.identities;
      if (auto* b = std::get_if<protocol::SampleBlock>(&m)) {
        seq.on_block(b->first_index, b->samples_per_channel);
        r.samples += b->samples_per_channel;
      }
      if (auto* e = std::get_if<protocol::BoardEvent>(&m); e && e->kind == protocol::EventKind::stream_end) {
        ++r.stream_ends;
        seq.restart();
      }
    }
    msgs.clear();
  };
  for (std::size_t at = 0; at < bytes.size(); at += chunk) {
    d.feed(std::span(bytes).subspan(at, std::min(chunk, bytes.size() - at)), msgs);
    handle();
  }
  d.finish(msgs);
  handle();
  r.decoder = d.counters();
  r.sequence = seq.counters();
  return r;
}

// The checks every fault kind shares: the receiver's counters equal the injector's.
void check_counts_match(const Stream& st, const Received& r) {
  const auto& c = st.counts;
  // Each corrupted frame's own header is rejected as predicted; each sync pair
  // met while hunting through its bytes is one more rejected header.
  CHECK(r.decoder.bad_crc >= c.expect_bad_crc);
  CHECK(r.decoder.bad_version >= c.expect_bad_version);
  CHECK(r.decoder.oversize >= c.expect_oversize);
  CHECK(r.decoder.bad_crc + r.decoder.bad_version + r.decoder.oversize ==
        c.expect_bad_crc + c.expect_bad_version + c.expect_oversize + c.expect_false_syncs);
  CHECK(r.decoder.malformed == 0);
  CHECK(r.decoder.truncated == 0);
  CHECK(r.decoder.discarded_bytes == c.expect_discarded_bytes);
  CHECK(r.decoder.frames_ok == c.frames_sent);
  CHECK(r.decoder.accepted_bytes + r.decoder.discarded_bytes == r.decoder.bytes_in);
  CHECK(r.sequence.gaps == c.expect_gaps);
  CHECK(r.sequence.missing_samples == c.expect_missing_samples);
  // Every sample is either received or lost, and every lost one is seen as a
  // gap unless it sat at a session's edge.
  CHECK(r.samples + c.samples_lost + st.truth.unsent_at_reboot == st.truth.samples);
  CHECK(c.expect_missing_samples + c.samples_lost_at_session_edges == c.samples_lost);
  CHECK(r.stream_ends == 1);
}

}  // namespace

TEST_CASE("sim faults: no faults, every frame decodes and no sample is missing", "[sim][faults]") {
  sim::Scenario s = small_scenario(20.0);
  const Stream st = run(s);
  const Received r = receive(st.bytes);
  CHECK(st.counts.frames_sent == st.counts.messages);
  CHECK(r.decoder.discarded_bytes == 0);
  CHECK(r.samples == st.truth.samples);
  CHECK(st.truth.samples == 20000);
  CHECK(r.sequence.gaps == 0);
  // The injector with nothing to do passes the bytes through unchanged.
  CHECK(run(s, false).bytes == st.bytes);
}

TEST_CASE("sim faults: corrupted bytes give exactly the bad CRCs, versions and discards predicted", "[sim][faults]") {
  sim::Scenario s = small_scenario(120.0);
  s.faults.corrupt_byte_rate = 1e-4;
  s.faults.seed = 3;
  const Stream st = run(s);
  const Received r = receive(st.bytes);
  INFO("corrupted frames " << st.counts.frames_corrupted << ", bytes " << st.counts.bytes_corrupted);
  CHECK(st.counts.frames_corrupted >= 50);  // the test must exercise something (≈ 1.5 MB × 1e-4)
  CHECK(st.counts.expect_bad_crc >= 40);
  check_counts_match(st, r);
}

TEST_CASE("sim faults: dropped frames become gaps with exactly the missing sample count", "[sim][faults]") {
  sim::Scenario s = small_scenario(120.0);
  s.faults.drop_frame_rate = 0.01;
  s.faults.seed = 5;
  const Stream st = run(s);
  const Received r = receive(st.bytes);
  CHECK(st.counts.frames_dropped >= 8);
  CHECK(st.counts.expect_gaps >= 10);
  CHECK(r.decoder.discarded_bytes == 0);  // a dropped frame leaves nothing to discard
  check_counts_match(st, r);
}

TEST_CASE("sim faults: garbage bursts are discarded byte for byte and lose no frame", "[sim][faults]") {
  sim::Scenario s = small_scenario(60.0);
  s.faults.garbage_burst_rate = 0.05;
  s.faults.garbage_burst_max_bytes = 300;
  s.faults.seed = 9;
  const Stream st = run(s);
  const Received r = receive(st.bytes);
  CHECK(st.counts.garbage_bursts >= 20);
  CHECK(r.decoder.discarded_bytes == st.counts.garbage_bytes);
  CHECK(st.counts.samples_lost == 0);
  check_counts_match(st, r);
}

TEST_CASE("sim faults: a cable pull loses exactly the samples sent while it was out, as one gap", "[sim][faults]") {
  sim::Scenario s = small_scenario(30.0);
  s.faults.cable_pull_at_s = {10.0, 20.0};
  s.faults.cable_pull_s = 0.75;
  const Stream st = run(s);
  const Received r = receive(st.bytes);
  CHECK(st.counts.cable_pulls == 2);
  CHECK(r.sequence.gaps == 2);
  // 750 samples each; blocks of 100 cut at 0.75 s boundaries: whole blocks only.
  CHECK(r.sequence.missing_samples >= 2 * 700);
  CHECK(r.sequence.missing_samples <= 2 * 800);
  check_counts_match(st, r);
}

TEST_CASE("sim faults: a board that stops mid-frame loses that frame only", "[sim][faults]") {
  sim::Scenario s = small_scenario(20.0);
  s.faults.stall_at_s = 7.0;
  const Stream st = run(s);
  const Received r = receive(st.bytes);
  CHECK(st.counts.stalls == 1);
  CHECK(st.stall_offset < st.bytes.size());
  CHECK(r.decoder.bad_crc == 1);
  CHECK(r.sequence.gaps == 1);
  CHECK(r.sequence.missing_samples == 100);  // one block of 100 samples per channel
  check_counts_match(st, r);
}

TEST_CASE("sim faults: a reboot sends the index back to 0 and the tracker sees a new session", "[sim][faults]") {
  sim::Scenario s = small_scenario(20.0);
  s.faults.reboot_at_s = 12.0;
  s.faults.reboot_s = 0.5;
  s.faults.reboot_zero_window_s = 0.5;
  const Stream st = run(s);
  const Received r = receive(st.bytes);
  CHECK(st.truth.sessions == 2);
  CHECK(st.counts.reboots == 1);
  CHECK(r.sequence.reboots == 1);
  CHECK(r.sequence.gaps == 0);
  // 20 s of board time less the 0.5 s the board was silent; the block it was
  // filling when it went down is never sent.
  CHECK(st.truth.samples == 19500);
  CHECK(st.truth.unsent_at_reboot > 0);
  CHECK(r.samples == 19500 - st.truth.unsent_at_reboot);
  CHECK(r.identities >= 2);
  // The beam's charge while the board was away is in the truth, not lost from it.
  CHECK(st.truth.channels[0].during_reboot_c > 0);
  check_counts_match(st, r);
}

TEST_CASE("sim faults: everything at once, still exact", "[sim][faults]") {
  sim::Scenario s = small_scenario(120.0);
  s.faults.corrupt_byte_rate = 1e-4;
  s.faults.drop_frame_rate = 5e-3;
  s.faults.garbage_burst_rate = 0.01;
  s.faults.cable_pull_at_s = {30.0, 90.0};
  s.faults.reboot_at_s = 60.0;
  s.faults.stall_at_s = 45.0;
  s.faults.seed = 11;
  const Stream st = run(s);
  const Received r = receive(st.bytes, 4093);
  CHECK(r.sequence.reboots == 1);
  CHECK(st.counts.frames_corrupted > 0);
  CHECK(st.counts.frames_dropped > 0);
  CHECK(st.counts.cable_pulls == 2);
  check_counts_match(st, r);
}

TEST_CASE("sim faults: the same seed gives the same bytes, another seed other bytes", "[sim][faults]") {
  sim::Scenario s = small_scenario(20.0);
  s.faults.corrupt_byte_rate = 1e-3;
  s.faults.drop_frame_rate = 1e-2;
  const Stream a = run(s), b = run(s);
  CHECK(a.bytes == b.bytes);
  s.faults.seed = 8;
  CHECK(run(s).bytes != a.bytes);
}

TEST_CASE("sim faults: a 50 ppm slow board clock is recovered by the clock model within 1 ppm", "[sim][faults]") {
  sim::Scenario s = small_scenario(600.0);
  s.channel_count = 1;
  s.samples_per_block = 250;
  s.faults.clock_skew_ppm = 50.0;
  sim::BoardModel board(s);
  CHECK(board.true_period_s() == Approx(1e-3 * (1 + 50e-6)).epsilon(1e-12));
  // Receive times: the true time of each block's last sample plus a USB-like
  // latency (1 ms + exponential jitter, mean 2 ms; 5 % spikes up to 0.5 s).
  daemon::ClockModel model(s.sample_period_s);
  std::mt19937_64 rng(4);
  std::exponential_distribution<double> jitter(1.0 / 2e-3);
  std::uniform_real_distribution<double> u(0.0, 1.0), spike(0.02, 0.5);
  protocol::Decoder d;
  std::vector<std::uint8_t> bytes;
  std::vector<protocol::Message> msgs;
  bool more = true;
  while (more) {
    more = board.produce(250, bytes);
    d.feed(bytes, msgs);
    bytes.clear();
    for (const auto& m : msgs)
      if (auto* b = std::get_if<protocol::SampleBlock>(&m)) {
        // One session from t = 0: the block's last sample happened at index * true period.
        const double t = double(b->first_index + b->samples_per_channel - 1) * board.true_period_s();
        const double latency = 1e-3 + jitter(rng) + (u(rng) < 0.05 ? spike(rng) : 0.0);
        model.add(b->first_index + b->samples_per_channel - 1, 1.7e9 + t + latency);
      }
    msgs.clear();
  }
  const auto f = model.fit();
  REQUIRE(f.valid);
  CHECK(std::fabs(f.skew_ppm - 50.0) < 1.0);
}

TEST_CASE("sim faults: scenario keys parse, and bad values are refused with the key named", "[sim][faults]") {
  sim::Scenario s;
  auto j = nlohmann::json::parse(R"({"faults": {"corrupt_byte_rate": 1e-4, "cable_pull_at_s": [5, 9], "reboot_at_s": 3}})");
  CHECK(sim::apply_json(j, s).empty());
  CHECK(s.faults.corrupt_byte_rate == 1e-4);
  CHECK(s.faults.cable_pull_at_s == std::vector<double>{5, 9});
  CHECK(s.faults.reboot_at_s == 3);
  CHECK(s.faults.any());
  CHECK(sim::apply_json(nlohmann::json::parse(R"({"faults": {"cable_pull_at_s": 7}})"), s).empty());
  CHECK(s.faults.cable_pull_at_s == std::vector<double>{7});
  CHECK(sim::apply_json(nlohmann::json::parse(R"({"faults": {"drop_frame_rate": 2}})"), s).find("drop_frame_rate") !=
        std::string::npos);
  CHECK(sim::apply_json(nlohmann::json::parse(R"({"faults": {"seed": "x"}})"), s).find("faults.seed") !=
        std::string::npos);
  // The scenario JSON round-trips the fault settings.
  sim::Scenario back;
  CHECK(sim::apply_json(sim::to_json(s), back).empty());
  CHECK(sim::to_json(back) == sim::to_json(s));
}
