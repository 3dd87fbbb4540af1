#include "tools/accrue-sim/board_model.hpp"

#include <algorithm>
#include <cmath>

#include "protocol/encoder.hpp"
#include "protocol/line_codec.hpp"

namespace accrue::sim {

using namespace protocol;

namespace {
std::uint64_t samples_in(double s, double dt) { return s > 0 ? std::uint64_t(std::llround(s / dt)) : 0; }
}  // namespace

BoardModel::BoardModel(Scenario scenario)
    : scenario_(std::move(scenario)),
      rng_(scenario_.seed),
      true_dt_(scenario_.sample_period_s * (1.0 + scenario_.faults.clock_skew_ppm * 1e-6)),
      samples_left_(scenario_.total_samples()),
      reset_samples_(std::max<std::uint64_t>(1, samples_in(scenario_.front_end.reset_s, scenario_.sample_period_s))),
      zero_samples_(samples_in(scenario_.zero_window_s, scenario_.sample_period_s)) {
  mode_ = zero_samples_ > 0 ? Mode::zeroing : Mode::live;
  const double dt = scenario_.sample_period_s;
  for (int k = 0; k < scenario_.channel_count; ++k) {
    Channel c;
    c.model = scenario_.channel(k);
    const auto& fe = c.model.front_end;
    c.noise = std::normal_distribution<double>(0.0, fe.noise_v > 0 ? fe.noise_v : 1e-30);
    c.drift_v_per_s = drift_v_per_s(fe);
    c.leak_factor = fe.r2_ohm > 0 ? std::exp(-dt / (fe.r2_ohm * fe.c_farad)) : 1.0;
    channels_.push_back(std::move(c));
  }
  truth_.channels.resize(channels_.size());
  block_.channel_count = std::uint8_t(channels_.size());
}

BoardIdentity BoardModel::identity() const {
  BoardIdentity id;
  id.board_serial = scenario_.board_serial;
  id.firmware_version = 0x0100;
  id.channel_count = std::uint8_t(channels_.size());
  id.adc_bits = std::uint8_t(scenario_.adc.bits);
  id.full_scale_v = scenario_.adc.full_scale_v;
  id.sample_period_s = scenario_.sample_period_s;
  id.capabilities = capability_bit::reset_switch | capability_bit::zero_relay | capability_bit::bipolar_adc;
  // One set of front-end values per identity (PROTOCOL.md §3.1): channel 0's.
  id.r1_ohm = scenario_.front_end.r1_ohm;
  id.c_farad = scenario_.front_end.c_farad;
  id.r2_ohm = scenario_.front_end.r2_ohm;
  return id;
}

std::uint8_t BoardModel::status() const {
  switch (mode_) {
    case Mode::zeroing: return status_bit::zero_relay;
    case Mode::resetting: return status_bit::reset_active;
    case Mode::live: return 0;
  }
  return 0;
}

void BoardModel::emit(const Message& m, std::vector<std::uint8_t>& out) {
  if (!injector_ && scenario_.wire == Wire::frames) {
    encode_into(m, out);
    return;
  }
  scratch_.clear();
  if (scenario_.wire == Wire::frames) {
    encode_into(m, scratch_);
  } else {
    const std::string lines = encode_line(m, true);
    scratch_.assign(lines.begin(), lines.end());
  }
  if (injector_) injector_->pass(m, scratch_, out);
  else out.insert(out.end(), scratch_.begin(), scratch_.end());
}

void BoardModel::flush_block(std::vector<std::uint8_t>& out) {
  if (block_.codes.empty()) return;
  block_.samples_per_channel = std::uint16_t(block_.codes.size() / channels_.size());
  emit(block_, out);
  block_.codes.clear();
}

std::int32_t BoardModel::to_code(double v) const {
  const double scale = std::ldexp(1.0, scenario_.adc.bits - 1);
  const double code = std::nearbyint(v / scenario_.adc.full_scale_v * scale);
  return std::int32_t(std::clamp(code, -scale, scale - 1));
}

void BoardModel::reboot(std::vector<std::uint8_t>& out) {
  // The board stops mid-run: what it had gathered is never sent, it is silent
  // for reboot_s, its firmware discharges the integrators at start, and the
  // new session counts samples from 0 again behind a fresh identity and zero window.
  const auto& f = scenario_.faults;
  truth_.unsent_at_reboot += block_.codes.size() / channels_.size();
  block_.codes.clear();
  rebooted_ = true;
  if (injector_) injector_->new_session();
  const double t0 = true_time_s();
  const double zero_s = double(samples_in(f.reboot_zero_window_s, scenario_.sample_period_s)) * true_dt_;
  for (std::size_t k = 0; k < channels_.size(); ++k) {
    truth_.channels[k].charge_c += channels_[k].model.beam.charge(t0, t0 + f.reboot_s);
    truth_.channels[k].during_reboot_c += channels_[k].model.beam.charge(t0, t0 + f.reboot_s + zero_s);
    channels_[k].v_cap = 0.0;
    channels_[k].settle_offset_v = 0.0;
  }
  const std::uint64_t silent = samples_in(f.reboot_s, scenario_.sample_period_s);
  samples_left_ -= std::min(samples_left_, silent);
  session_start_s_ = t0 + f.reboot_s;
  index_ = 0;
  ++truth_.sessions;
  zero_samples_ = samples_in(f.reboot_zero_window_s, scenario_.sample_period_s);
  mode_ = zero_samples_ > 0 ? Mode::zeroing : Mode::live;
  reset_requested_ = zero_requested_ = false;
  reset_left_ = 0;
  next_identity_s_ = session_start_s_ + scenario_.identity_every_s;
  emit(identity(), out);
  if (mode_ == Mode::zeroing) emit(BoardEvent{EventKind::zero_relay_closed, 0xFF, 0, 0}, out);
}

bool BoardModel::produce(std::uint64_t max_samples, std::vector<std::uint8_t>& out) {
  if (finished_) return false;
  const double dt = true_dt_;
  const std::size_t n_ch = channels_.size();
  if (index_ == 0 && truth_.samples == 0) {
    emit(identity(), out);
    if (mode_ == Mode::zeroing) emit(BoardEvent{EventKind::zero_relay_closed, 0xFF, 0, 0}, out);
  }
  for (std::uint64_t n = 0; n < max_samples && samples_left_ > 0; ++n, ++index_, --samples_left_) {
    if (!rebooted_ && scenario_.faults.reboot_at_s >= 0 && true_time_s() >= scenario_.faults.reboot_at_s) {
      reboot(out);
      if (samples_left_ == 0) break;
    }
    const double t = true_time_s();
    // Mode changes take effect at this sample; cut the block first.
    Mode next = mode_;
    if (mode_ == Mode::zeroing && (index_ >= zero_samples_ && !zero_requested_)) next = Mode::live;
    if (mode_ == Mode::live && zero_requested_) next = Mode::zeroing;
    if (mode_ == Mode::live && reset_requested_) next = Mode::resetting;
    if (mode_ == Mode::resetting && reset_left_ == 0) next = Mode::live;
    if (next != mode_) {
      flush_block(out);
      if (mode_ == Mode::resetting) {
        for (auto& c : channels_) {
          c.v_cap = c.model.front_end.pedestal_v;  // charge injection as the switch opens
          c.settle_offset_v = -c.model.front_end.pedestal_v;
        }
        // Version 1 events carry one value: channel 0's pedestal (the others settle alike).
        emit(BoardEvent{EventKind::reset_end, 0, index_,
                        std::int32_t(std::lround(channels_[0].model.front_end.pedestal_v * 1e6))},
             out);
      }
      if (mode_ == Mode::zeroing) emit(BoardEvent{EventKind::zero_relay_opened, 0xFF, index_, 0}, out);
      if (next == Mode::resetting) {
        reset_requested_ = false;
        reset_left_ = reset_samples_;
        ++truth_.resets;
        emit(BoardEvent{EventKind::reset_begin, 0, index_, 0}, out);
      }
      if (next == Mode::zeroing) emit(BoardEvent{EventKind::zero_relay_closed, 0xFF, index_, 0}, out);
      mode_ = next;
    }
    if (t >= next_identity_s_ && block_.codes.empty()) {
      if (index_ > 0) emit(identity(), out);
      next_identity_s_ = t + scenario_.identity_every_s;
    }
    if (block_.codes.empty()) {
      block_.first_index = index_;
      block_.status = status();
    }
    // Read every channel's output at t.
    for (std::size_t k = 0; k < n_ch; ++k) {
      Channel& c = channels_[k];
      const auto& fe = c.model.front_end;
      double v = fe.offset_v + c.v_cap + c.settle_offset_v + c.noise(rng_);
      if (std::fabs(v) >= fe.rail_v) {
        v = std::copysign(fe.rail_v, v);
        ++truth_.channels[k].clipped_samples;
      }
      block_.codes.push_back(to_code(v));
    }
    if (block_.codes.size() >= std::size_t(scenario_.samples_per_block) * n_ch) flush_block(out);

    // Advance to t + dt.
    for (std::size_t k = 0; k < n_ch; ++k) {
      Channel& c = channels_[k];
      ChannelTruth& truth = truth_.channels[k];
      const auto& fe = c.model.front_end;
      const double tau_r2 = fe.r2_ohm > 0 ? fe.r2_ohm * fe.c_farad : 0.0;
      const double settle_decay = fe.settle_tau_s > 0 ? std::exp(-dt / fe.settle_tau_s) : 0.0;
      const double q = c.model.beam.charge(t, t + dt);
      truth.charge_c += q;
      c.settle_offset_v *= settle_decay;
      switch (mode_) {
        case Mode::resetting:
          truth.lost_in_dead_c += q;
          c.v_cap = 0.0;
          break;
        case Mode::zeroing:
          truth.lost_in_dead_c += q;  // the relay shorts the input: the charge goes to ground
          [[fallthrough]];
        case Mode::live: {
          const double input_rate = mode_ == Mode::live ? -q / dt / fe.c_farad : 0.0;
          const double rate = input_rate + c.drift_v_per_s;
          if (tau_r2 > 0) c.v_cap = c.v_cap * c.leak_factor + rate * tau_r2 * (1.0 - c.leak_factor);
          else c.v_cap += rate * dt;
          const double out_now = fe.offset_v + c.v_cap;
          if (mode_ == Mode::live && std::fabs(out_now) >= fe.reset_threshold_v) reset_requested_ = true;
          break;
        }
      }
    }
    if (mode_ == Mode::resetting) --reset_left_;
    ++truth_.samples;
  }
  truth_.charge_c = truth_.channels[0].charge_c;
  truth_.lost_in_dead_c = truth_.channels[0].lost_in_dead_c;
  truth_.clipped_samples = 0;
  for (const auto& c : truth_.channels) truth_.clipped_samples += c.clipped_samples;
  if (samples_left_ == 0) {
    flush_block(out);
    emit(BoardEvent{EventKind::stream_end, 0xFF, index_, 0}, out);
    finished_ = true;
  }
  return !finished_;
}

void BoardModel::command(const BoardCommand& c, std::vector<std::uint8_t>& out) {
  AckStatus status = AckStatus::ok;
  switch (c.op) {
    case CommandOp::ping: break;
    case CommandOp::identify:
      // Identity goes out at the next block boundary; an identity frame never splits a block.
      next_identity_s_ = 0.0;
      break;
    case CommandOp::reset_now:
      if (mode_ == Mode::live) reset_requested_ = true;
      else status = AckStatus::busy;
      break;
    case CommandOp::zero_relay:
      if (c.argument > 1) status = AckStatus::bad_argument;
      else zero_requested_ = c.argument == 1;
      break;
    case CommandOp::set_sample_period:
      // Changing the timebase mid-run would need a new board session; not offered by this model.
      status = AckStatus::unknown_command;
      break;
  }
  emit(CommandAck{c.request_id, status}, out);
}

}  // namespace accrue::sim
