#include <catch2/catch.hpp>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <optional>
#include <random>
#include <string>
#include <variant>
#include <vector>

#include "daemon/chain/channel_chain.hpp"
#include "daemon/chain/reset_schedule.hpp"
#include "protocol/decoder.hpp"
#include "protocol/messages.hpp"
#include "tools/accrue-sim/board_model.hpp"
#include "tools/accrue-sim/scenario.hpp"

// Monte Carlo of the whole measurement chain against the simulator's truth:
// the simulator's board model (the physics accrue-sim plays on a pty, here
// called directly) -> its frames -> protocol::Decoder -> ChannelChain, with a
// ResetScheduler commanding the board in the runs that use host resets. Each
// run is eight simulated hours with its own randomised front end, input and
// reset schedule; the truth is the board model's exact integral of its input
// current (closed-form antiderivative, beam.hpp). The ranges below are
// invented, chosen to span cheap to good op-amps and quiet to busy inputs.
//
// ACCRUE_MC_RUNS overrides the number of runs (default 200) so a slow build
// (the sanitizer suite) can run fewer; the coverage band is only asserted
// with all 200.

using namespace accrue;
namespace status_bit = protocol::status_bit;

namespace {

struct RunResult {
  double truth_c = 0.0;
  double total_c = 0.0;
  double u_c = 0.0;  // k = 1
  double stitched_uncorrected_c = 0.0;
  std::uint32_t segments = 0;
  std::uint64_t resets = 0;
  std::uint32_t flags = 0;
  int mode = 0;  // a ResetMode
  std::string setup;
  // Diagnosis: the error split into segment deltas and dead-time estimates (truth from the beam model).
  double segment_err_c = 0.0, gap_err_c = 0.0, segment_u2 = 0.0, gap_u2 = 0.0;
};

double log_uniform(std::mt19937_64& rng, double lo, double hi) {
  return std::exp(std::uniform_real_distribution<double>(std::log(lo), std::log(hi))(rng));
}
double uniform(std::mt19937_64& rng, double lo, double hi) { return std::uniform_real_distribution<double>(lo, hi)(rng); }
double random_sign(std::mt19937_64& rng) { return std::bernoulli_distribution(0.5)(rng) ? 1.0 : -1.0; }

enum class ResetMode { board_threshold, host_interval, host_threshold };

RunResult run_once(std::uint64_t seed, double sample_period_s) {
  std::mt19937_64 rng(seed);
  sim::Scenario s;
  s.seed = seed;  // the board's own noise generator
  s.duration_s = 8 * 3600.0;
  s.sample_period_s = sample_period_s;
  s.zero_window_s = uniform(rng, 30.0, 120.0);
  s.samples_per_block = 16;
  s.identity_every_s = 600.0;
  auto& fe = s.front_end;
  fe.r1_ohm = 1e9;
  fe.c_farad = log_uniform(rng, 0.5e-9, 5e-9);
  fe.offset_v = random_sign(rng) * log_uniform(rng, 0.05e-3, 3e-3);
  fe.bias_a = random_sign(rng) * log_uniform(rng, 0.2e-12, 20e-12);
  fe.noise_v = log_uniform(rng, 5e-6, 300e-6);
  fe.reset_s = uniform(rng, 1e-3, 50e-3);
  fe.settle_tau_s = uniform(rng, 0.05e-3, 1e-3);
  fe.pedestal_v = random_sign(rng) * log_uniform(rng, 0.5e-3, 20e-3);
  const bool with_r2 = std::bernoulli_distribution(1.0 / 3.0)(rng);
  fe.r2_ohm = with_r2 ? uniform(rng, 500.0, 5000.0) / fe.c_farad : 0.0;  // tau = R2*C of 500..5000 s
  static constexpr int bits_choice[] = {16, 18, 20, 24};
  s.adc.bits = bits_choice[std::uniform_int_distribution<int>(0, 3)(rng)];
  s.adc.full_scale_v = 10.0;
  auto& beam = s.beam;
  beam.current_a = log_uniform(rng, 20e-12, 400e-12);
  beam.modulation = uniform(rng, 0.0, 0.5);
  beam.modulation_period_s = uniform(rng, 1.0, 6.0) * 3600.0;
  beam.spill_period_s = uniform(rng, 2.0, 30.0);
  beam.spill_on_s = beam.spill_period_s * uniform(rng, 0.3, 1.0);
  beam.start_s = s.zero_window_s + uniform(rng, 30.0, 300.0);
  beam.stop_s = s.duration_s - uniform(rng, 30.0, 300.0);

  // Output slew at the largest input, to keep every schedule below the clip level.
  const double max_rate_v_per_s =
      beam.current_a * (1 + beam.modulation) / fe.c_farad + std::fabs(s.drift_v_per_s());
  const double block_s = s.samples_per_block * s.sample_period_s;
  const ResetMode mode = ResetMode(std::uniform_int_distribution<int>(0, 2)(rng));
  chain::ResetScheduleSettings sched;
  sched.full_scale_v = s.adc.full_scale_v;
  sched.command_timeout_s = 2.0;
  switch (mode) {
    case ResetMode::board_threshold:
      fe.reset_threshold_v = uniform(rng, 3.0, 9.0);
      break;
    case ResetMode::host_interval:
      fe.reset_threshold_v = 9.5;  // the board's own guard, rarely reached
      sched.interval_s = std::min(uniform(rng, 10.0, 600.0), 8.0 / max_rate_v_per_s);
      break;
    case ResetMode::host_threshold:
      fe.reset_threshold_v = 100.0;  // off: only the host resets
      // The host sees the output once per block: leave two blocks of ramp below the clip level.
      sched.threshold_fraction =
          std::max(0.2, std::min(uniform(rng, 0.3, 0.9), (9.0 - 2.0 * max_rate_v_per_s * block_s) / s.adc.full_scale_v));
      sched.rearm_fraction = sched.threshold_fraction * 0.5;
      sched.interval_s = 3600.0;  // with R2 the output may settle below the threshold
      break;
  }

  sim::BoardModel board(s);
  protocol::Decoder decoder;
  std::vector<std::uint8_t> bytes, replies;
  std::vector<protocol::Message> messages;
  std::optional<chain::ChannelChain> ch;
  chain::ResetScheduler scheduler(sched);
  std::vector<chain::ScheduleAction> actions;
  chain::ChainOutput out;
  std::uint16_t request_id = 0;
  const bool host_resets = mode != ResetMode::board_threshold;

  // Splits each closed segment's error into its delta and its dead-time estimate.
  double seg_err = 0, gap_err = 0, seg_u2 = 0, gap_u2 = 0;
  std::size_t accounted = 0;
  std::uint64_t prev_last = 0;
  const auto account = [&](const chain::ChainOutput& o) {
    if (o.segments.size() < accounted) accounted = 0;
    const double dt = s.sample_period_s, qpv = -fe.c_farad;
    for (; accounted < o.segments.size(); ++accounted) {
      const chain::SegmentRecord& g = o.segments[accounted];
      seg_err += (g.end_v - g.start_v - g.drift_v) * qpv - s.beam.charge(double(g.first_index) * dt, double(g.last_index) * dt);
      seg_u2 += g.end_points_u_v * g.end_points_u_v * qpv * qpv;
      if (g.flags & chain::segment_flag::gap_estimated) {
        gap_err += g.gap_before_v * qpv - s.beam.charge(double(prev_last) * dt, double(g.first_index) * dt);
        gap_u2 += g.gap_before_u_v * g.gap_before_u_v * qpv * qpv;
      }
      prev_last = g.last_index;
    }
  };
  bool more = true;
  while (more) {
    bytes.clear();
    more = board.produce(s.samples_per_block, bytes);
    messages.clear();
    decoder.feed(bytes, messages);
    for (const protocol::Message& m : messages) {
      if (const auto* id = std::get_if<protocol::BoardIdentity>(&m)) {
        if (ch) continue;
        // The calibration the daemon builds from the identity (Ingest::calibration_for).
        chain::Calibration cal;
        cal.adc.bits = id->adc_bits;
        cal.adc.full_scale_v = id->full_scale_v;
        cal.adc.bipolar = id->capabilities & protocol::capability_bit::bipolar_adc;
        cal.front_end.r1_ohm = id->r1_ohm;
        cal.front_end.c_farad = id->c_farad;
        cal.front_end.r2_ohm = id->r2_ohm;
        chain::ChainSettings cs;
        cs.sample_period_s = id->sample_period_s;
        cs.series_interval_s = 60.0;
        ch.emplace(cal, cs);
      } else if (const auto* b = std::get_if<protocol::SampleBlock>(&m)) {
        if (!ch) FAIL("a sample block before the board's identity");
        ch->process(b->first_index, b->status, b->codes.data(), b->samples_per_channel, 1, out);
        if (host_resets && b->samples_per_channel > 0) {
          const double t = double(b->first_index + b->samples_per_channel - 1) * s.sample_period_s;
          double v = 0.0;  // the block's largest |output|, as the daemon's reset driver gives it
          for (std::int32_t code : b->codes) v = std::max(v, std::fabs(ch->calibration().adc.to_volts(code)));
          actions.clear();
          scheduler.observe(t, 1.7e9 + t, v, b->status, actions);
          for (const auto& a : actions) {
            if (a.decision != chain::ScheduleDecision::reset_now) continue;
            replies.clear();
            board.command(protocol::BoardCommand{++request_id, protocol::CommandOp::reset_now, 0}, replies);
          }
        }
      }
    }
    account(out);
    // Keep memory flat over the run: the records are not needed here.
    if (out.segments.size() > 256 || out.series.size() > 256) {
      out.clear();
      accounted = 0;
    }
  }
  REQUIRE(ch);
  ch->finish(out);
  account(out);
  const chain::TotalSnapshot snap = ch->snapshot();
  const double qpv = ch->calibration().quantity_per_volt();
  RunResult r;
  r.truth_c = double(board.truth().charge_c);
  r.total_c = snap.total;
  r.u_c = snap.std_uncertainty;
  r.stitched_uncorrected_c = snap.state.stitched_uncorrected_v * qpv;
  r.segments = snap.segments;
  r.resets = board.truth().resets;
  r.flags = snap.flags;
  r.segment_err_c = seg_err;
  r.gap_err_c = gap_err;
  r.segment_u2 = seg_u2;
  r.gap_u2 = gap_u2;
  char setup[400];
  std::snprintf(setup, sizeof setup,
                "seed %llu: mode %d, C %.3g F, R2 %.3g ohm, Vos %.3g V, Ib %.3g A, noise %.3g V, bits %d, I %.3g A, "
                "spill %.3g/%.3g s, pedestal %.3g V, threshold %.3g V, interval %.3g s",
                (unsigned long long)seed, int(mode), fe.c_farad, fe.r2_ohm, fe.offset_v, fe.bias_a, fe.noise_v,
                s.adc.bits, beam.current_a, beam.spill_on_s, beam.spill_period_s, fe.pedestal_v,
                mode == ResetMode::host_threshold ? sched.threshold_fraction * 10.0 : fe.reset_threshold_v,
                sched.interval_s);
  r.setup = setup;
  r.mode = int(mode);
  return r;
}

double median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  const std::size_t n = v.size();
  return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

struct Figures {
  std::size_t runs = 0, covered = 0, clipped = 0;
  std::size_t mode_runs[3] = {0, 0, 0}, mode_covered[3] = {0, 0, 0};  // by ResetMode
  double median_abs_rel = 0, median_abs_rel_uncorrected = 0, coverage = 0;
};

// The runs are made once and shared by the test cases below.
const Figures& figures() {
  static const Figures f = [] {
    Figures out;
  std::size_t runs = 200;
  if (const char* e = std::getenv("ACCRUE_MC_RUNS"); e && std::atoi(e) > 0) runs = std::size_t(std::atoi(e));
  // 10 samples per second keeps 200 runs of 8 hours (57.6 M samples) fast enough for a unit test.
  const double sample_period_s = 0.1;
  const std::uint64_t base_seed = 20261202;
  const bool verbose = std::getenv("ACCRUE_MC_VERBOSE") != nullptr;  // one line per run, for diagnosis

  const auto wall0 = std::chrono::steady_clock::now();
  std::vector<double> abs_rel, abs_rel_uncorrected, z;
  std::size_t covered = 0, clipped = 0;
  double worst_z = 0.0;
  std::string worst_setup;
  for (std::size_t k = 0; k < runs; ++k) {
    const RunResult r = run_once(base_seed + k, sample_period_s);
    REQUIRE(r.truth_c > 0);
    REQUIRE(r.u_c > 0);
    const double err = r.total_c - r.truth_c;
    if (verbose)
      std::printf("run %zu: rel err %.3g, err/u %.2f, segments %u, flags %#x, segment err/u %.2f, gap err/u %.2f; %s\n",
                  k, err / r.truth_c, err / r.u_c, r.segments, r.flags, r.segment_err_c / std::sqrt(r.segment_u2),
                  r.gap_err_c / std::sqrt(r.gap_u2), r.setup.c_str());
    abs_rel.push_back(std::fabs(err) / r.truth_c);
    abs_rel_uncorrected.push_back(std::fabs(r.stitched_uncorrected_c - r.truth_c) / r.truth_c);
    z.push_back(err / r.u_c);
    if (std::fabs(err) <= 2.0 * r.u_c) ++covered;
    ++out.mode_runs[r.mode];
    if (std::fabs(err) <= 2.0 * r.u_c) ++out.mode_covered[r.mode];
    if (r.flags & chain::segment_flag::clipped) ++clipped;
    if (std::fabs(err / r.u_c) > std::fabs(worst_z)) {
      worst_z = err / r.u_c;
      worst_setup = r.setup + ", rel err " + std::to_string(err / r.truth_c) + ", segments " +
                    std::to_string(r.segments);
    }
  }
  const double wall_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - wall0).count();
  double z2 = 0.0;
  for (double x : z) z2 += x * x;
  const double coverage = double(covered) / double(runs);
  const double med = median(abs_rel);
  std::printf("chain Monte Carlo: %zu runs of 8 h at %.0f S/s, %.1f s wall\n", runs, 1.0 / sample_period_s, wall_s);
  std::printf("  median |error| of the total      %.3g %%  (limit 0.05 %%)\n", 100.0 * med);
  std::printf("  largest |error|                  %.3g %%\n",
              100.0 * *std::max_element(abs_rel.begin(), abs_rel.end()));
  std::printf("  k=2 coverage                     %.1f %%  (%zu of %zu runs; band 93-97 %%)\n", 100.0 * coverage,
              covered, runs);
  std::printf("  rms of error/u (k=1), ideal 1    %.3f\n", std::sqrt(z2 / double(runs)));
  const char* mode_names[3] = {"board threshold", "host interval", "host threshold"};
  for (int m = 0; m < 3; ++m)
    std::printf("  k=2 coverage, %-16s   %zu of %zu runs\n", mode_names[m], out.mode_covered[m], out.mode_runs[m]);
  std::printf("  worst error/u                    %.2f (%s)\n", worst_z, worst_setup.c_str());
  std::printf("  uncorrected (resets stitched, no drift removal, no dead-time estimate): median |error| %.3g %%\n",
              100.0 * median(abs_rel_uncorrected));
  std::printf("  runs with a clipped segment      %zu\n", clipped);

    out.runs = runs;
    out.covered = covered;
    out.clipped = clipped;
    out.median_abs_rel = med;
    out.median_abs_rel_uncorrected = median(abs_rel_uncorrected);
    out.coverage = coverage;
    return out;
  }();
  return f;
}

}  // namespace

TEST_CASE("chain_monte_carlo: 200 simulated 8-hour runs, median |error| of the total within 0.05 %",
          "[chain][monte_carlo]") {
  const Figures& f = figures();
  CHECK(f.clipped == 0);  // the schedules are chosen to stay below the clip level
  CHECK(f.median_abs_rel <= 5e-4);
  // Drift removal must matter: the uncorrected figure is far worse.
  CHECK(f.median_abs_rel_uncorrected > 10.0 * f.median_abs_rel);
}

// The stated k=2 uncertainty must cover the truth in 93-97 % of the 200 runs
// (binomial spread at 200 runs is about 1.6 %; the seeds are fixed, so the
// figure is reproducible). Two rules of the chain carry this: a reset-active
// block's first sample ends the segment (PROTOCOL.md §3.2), so a threshold
// reset's dead time no longer includes the interval whose input pushed the
// output over; and a dead time next to a change of input takes the far
// side's rate (EndEstimate::changed_at_end). The misses left are mostly
// inputs whose off-time is shorter than one sample period (spill_on_s near
// spill_period_s), which no sampled chain can resolve. Each reset mode's
// share is printed above; none is asserted alone (54-75 runs each are too
// few for a band this narrow).
TEST_CASE("chain_monte_carlo: the k=2 uncertainty covers the truth in 93-97 % of the runs", "[chain][monte_carlo]") {
  const Figures& f = figures();
  if (f.runs != 200) return;  // the band is for 200 runs
  INFO("coverage " << f.coverage << " of " << f.runs << " runs");
  CHECK(f.coverage >= 0.93);
  CHECK(f.coverage <= 0.97);
  // Every reset mode is in the sample and none is far off.
  for (int m = 0; m < 3; ++m) {
    INFO("reset mode " << m << ": " << f.mode_covered[m] << " of " << f.mode_runs[m]);
    REQUIRE(f.mode_runs[m] > 40);
    CHECK(double(f.mode_covered[m]) / double(f.mode_runs[m]) >= 0.85);
  }
}
