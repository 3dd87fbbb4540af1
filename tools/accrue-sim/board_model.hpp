#pragma once
// BoardModel simulates an integrator board sample by sample and emits the
// frames a real board would send (protocol/PROTOCOL.md): identity, sample
// blocks cut at every status change, reset and zero-relay events, and a
// stream_end after the last sample. Physics: an inverting charge amplifier
// with feedback C (optional R2 across it), offset voltage and bias current
// (drift), output noise, rails, a bipolar ADC, and a reset switch that shorts
// C for reset_s and leaves a pedestal that settles with settle_tau_s.
// Deterministic for a given scenario and seed. It keeps the truth: the exact
// charge the beam delivered.
#include <cstdint>
#include <random>
#include <vector>

#include "protocol/messages.hpp"
#include "tools/accrue-sim/scenario.hpp"

namespace accrue::sim {

struct Truth {
  long double charge_c = 0;        // all charge the beam delivered
  long double lost_in_dead_c = 0;  // of which during resets and zero windows
  std::uint64_t samples = 0;
  std::uint64_t resets = 0;
  std::uint64_t clipped_samples = 0;
};

class BoardModel {
 public:
  explicit BoardModel(Scenario scenario);

  // Appends frames for up to `max_samples` further samples; false once the run is over.
  bool produce(std::uint64_t max_samples, std::vector<std::uint8_t>& out);
  // Handles a host command, appending the ack (and any reply) to `out`.
  void command(const protocol::BoardCommand& c, std::vector<std::uint8_t>& out);

  const Truth& truth() const { return truth_; }
  const Scenario& scenario() const { return scenario_; }
  std::uint64_t next_index() const { return index_; }
  bool finished() const { return finished_; }
  protocol::BoardIdentity identity() const;

 private:
  enum class Mode { zeroing, resetting, live };
  std::uint8_t status() const;
  void flush_block(std::vector<std::uint8_t>& out);
  void emit(const protocol::Message& m, std::vector<std::uint8_t>& out);
  std::int32_t to_code(double v) const;

  Scenario scenario_;
  std::mt19937_64 rng_;
  std::normal_distribution<double> noise_;
  std::uint64_t total_samples_;
  std::uint64_t reset_samples_;
  std::uint64_t zero_samples_;
  double drift_v_per_s_;
  double leak_factor_;  // exp(-dt/(R2*C)), 1 without R2

  Mode mode_ = Mode::zeroing;
  std::uint64_t index_ = 0;
  std::uint64_t reset_left_ = 0;
  bool reset_requested_ = false;
  bool zero_requested_ = false;
  double v_cap_ = 0.0;
  double settle_offset_v_ = 0.0;  // decays after the switch opens
  bool finished_ = false;
  double next_identity_s_ = 0.0;

  protocol::SampleBlock block_;
  Truth truth_;
};

}  // namespace accrue::sim
