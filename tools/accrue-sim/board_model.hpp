#pragma once
// BoardModel simulates an integrator board sample by sample and emits the
// messages a real board would send (protocol/PROTOCOL.md): identity, sample
// blocks cut at every status change, reset and zero-relay events, and a
// stream_end after the last sample, as frames or as text lines (§5).
// Physics per channel: an inverting charge amplifier with feedback C
// (optional R2 across it), offset voltage and bias current (drift), output
// noise, rails, a bipolar ADC, and a reset switch that shorts C for reset_s
// and leaves a pedestal that settles with settle_tau_s. The channels share one
// status (PROTOCOL.md §3.2): a reset, triggered by any channel reaching its
// threshold, and a zero window apply to all of them.
//
// Board faults (scenario "faults"): a clock whose true sample period is
// nominal*(1 + clock_skew_ppm*1e-6), and a reboot at reboot_at_s (silent for
// reboot_s, integrators discharged, sample index back to 0, identity sent
// again, a zero window of reboot_zero_window_s). Link faults go through an
// optional FaultInjector the caller owns (set_injector); it sees every message.
//
// Deterministic for a given scenario and seed. It keeps the truth: the exact
// charge the input delivered to each channel, in true (not board) time.
#include <cstdint>
#include <random>
#include <vector>

#include "protocol/messages.hpp"
#include "tools/accrue-sim/faults.hpp"
#include "tools/accrue-sim/scenario.hpp"

namespace accrue::sim {

struct ChannelTruth {
  long double charge_c = 0;        // all charge the input delivered
  long double lost_in_dead_c = 0;  // of which during resets and zero windows
  long double during_reboot_c = 0; // of which while rebooting and in the zero window after it
  std::uint64_t clipped_samples = 0;
};

struct Truth {
  long double charge_c = 0;        // channel 0 (kept for single-channel readers)
  long double lost_in_dead_c = 0;
  std::uint64_t samples = 0;       // per channel, over all sessions
  std::uint64_t resets = 0;
  std::uint64_t clipped_samples = 0;
  std::uint64_t sessions = 1;
  std::uint64_t unsent_at_reboot = 0;  // samples the board had gathered but not sent when it rebooted
  std::vector<ChannelTruth> channels;
};

class BoardModel {
 public:
  explicit BoardModel(Scenario scenario);

  // Appends the wire bytes for up to `max_samples` further samples; false once the run is over.
  bool produce(std::uint64_t max_samples, std::vector<std::uint8_t>& out);
  // Handles a host command, appending the ack (and any reply) to `out`.
  void command(const protocol::BoardCommand& c, std::vector<std::uint8_t>& out);
  // Every message then passes through `injector` (not owned; nullptr: none).
  void set_injector(FaultInjector* injector) { injector_ = injector; }

  const Truth& truth() const { return truth_; }
  const Scenario& scenario() const { return scenario_; }
  std::uint64_t next_index() const { return index_; }
  // True time of the next sample since the board first started, seconds.
  double true_time_s() const { return session_start_s_ + double(index_) * true_dt_; }
  double true_period_s() const { return true_dt_; }
  bool finished() const { return finished_; }
  protocol::BoardIdentity identity() const;

 private:
  enum class Mode { zeroing, resetting, live };
  struct Channel {
    ChannelModel model;
    std::normal_distribution<double> noise;
    double drift_v_per_s = 0;
    double leak_factor = 1;  // exp(-dt/(R2*C)), 1 without R2
    double v_cap = 0;
    double settle_offset_v = 0;  // decays after the switch opens
  };
  std::uint8_t status() const;
  void flush_block(std::vector<std::uint8_t>& out);
  void emit(const protocol::Message& m, std::vector<std::uint8_t>& out);
  std::int32_t to_code(double v) const;
  void reboot(std::vector<std::uint8_t>& out);

  Scenario scenario_;
  std::mt19937_64 rng_;
  std::vector<Channel> channels_;
  double true_dt_;
  std::uint64_t samples_left_;
  std::uint64_t reset_samples_;
  std::uint64_t zero_samples_;
  FaultInjector* injector_ = nullptr;
  std::vector<std::uint8_t> scratch_;

  Mode mode_ = Mode::zeroing;
  std::uint64_t index_ = 0;
  double session_start_s_ = 0.0;
  bool rebooted_ = false;
  std::uint64_t reset_left_ = 0;
  bool reset_requested_ = false;
  bool zero_requested_ = false;
  bool finished_ = false;
  double next_identity_s_ = 0.0;

  protocol::SampleBlock block_;
  Truth truth_;
};

}  // namespace accrue::sim
