#include "tools/accrue-sim/board_model.hpp"

#include <algorithm>
#include <cmath>

#include "protocol/encoder.hpp"

namespace accrue::sim {

using namespace protocol;

BoardModel::BoardModel(Scenario scenario)
    : scenario_(std::move(scenario)),
      rng_(scenario_.seed),
      noise_(0.0, scenario_.front_end.noise_v > 0 ? scenario_.front_end.noise_v : 1e-30),
      total_samples_(scenario_.total_samples()),
      reset_samples_(std::max<std::uint64_t>(1, std::uint64_t(std::llround(scenario_.front_end.reset_s /
                                                                            scenario_.sample_period_s)))),
      zero_samples_(std::uint64_t(std::llround(scenario_.zero_window_s / scenario_.sample_period_s))),
      drift_v_per_s_(scenario_.drift_v_per_s()),
      leak_factor_(scenario_.front_end.r2_ohm > 0
                       ? std::exp(-scenario_.sample_period_s / (scenario_.front_end.r2_ohm * scenario_.front_end.c_farad))
                       : 1.0) {
  mode_ = zero_samples_ > 0 ? Mode::zeroing : Mode::live;
  block_.channel_count = 1;
}

BoardIdentity BoardModel::identity() const {
  BoardIdentity id;
  id.board_serial = scenario_.board_serial;
  id.firmware_version = 0x0100;
  id.channel_count = 1;
  id.adc_bits = std::uint8_t(scenario_.adc.bits);
  id.full_scale_v = scenario_.adc.full_scale_v;
  id.sample_period_s = scenario_.sample_period_s;
  id.capabilities = capability_bit::reset_switch | capability_bit::zero_relay | capability_bit::bipolar_adc;
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

void BoardModel::emit(const Message& m, std::vector<std::uint8_t>& out) { encode_into(m, out); }

void BoardModel::flush_block(std::vector<std::uint8_t>& out) {
  if (block_.codes.empty()) return;
  block_.samples_per_channel = std::uint16_t(block_.codes.size());
  emit(block_, out);
  block_.codes.clear();
}

std::int32_t BoardModel::to_code(double v) const {
  const double scale = std::ldexp(1.0, scenario_.adc.bits - 1);
  const double code = std::nearbyint(v / scenario_.adc.full_scale_v * scale);
  return std::int32_t(std::clamp(code, -scale, scale - 1));
}

bool BoardModel::produce(std::uint64_t max_samples, std::vector<std::uint8_t>& out) {
  if (finished_) return false;
  const double dt = scenario_.sample_period_s;
  const auto& fe = scenario_.front_end;
  const double tau_r2 = fe.r2_ohm > 0 ? fe.r2_ohm * fe.c_farad : 0.0;
  const double settle_decay = fe.settle_tau_s > 0 ? std::exp(-dt / fe.settle_tau_s) : 0.0;
  if (index_ == 0) {
    emit(identity(), out);
    if (mode_ == Mode::zeroing) emit(BoardEvent{EventKind::zero_relay_closed, 0xFF, 0, 0}, out);
  }
  for (std::uint64_t n = 0; n < max_samples && index_ < total_samples_; ++n, ++index_) {
    const double t = double(index_) * dt;
    // Mode changes take effect at this sample; cut the block first.
    Mode next = mode_;
    if (mode_ == Mode::zeroing && (index_ >= zero_samples_ && !zero_requested_)) next = Mode::live;
    if (mode_ == Mode::live && zero_requested_) next = Mode::zeroing;
    if (mode_ == Mode::live && reset_requested_) next = Mode::resetting;
    if (mode_ == Mode::resetting && reset_left_ == 0) next = Mode::live;
    if (next != mode_) {
      flush_block(out);
      if (mode_ == Mode::resetting) {
        v_cap_ = fe.pedestal_v;  // charge injection as the switch opens
        settle_offset_v_ = -fe.pedestal_v;
        emit(BoardEvent{EventKind::reset_end, 0, index_, std::int32_t(std::lround(fe.pedestal_v * 1e6))}, out);
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
    // Read the output at t.
    double v = fe.offset_v + v_cap_ + settle_offset_v_ + noise_(rng_);
    if (std::fabs(v) >= fe.rail_v) {
      v = std::copysign(fe.rail_v, v);
      ++truth_.clipped_samples;
    }
    block_.codes.push_back(to_code(v));
    if (block_.codes.size() >= scenario_.samples_per_block) flush_block(out);

    // Advance to t + dt.
    const double q = scenario_.beam.charge(t, t + dt);
    truth_.charge_c += q;
    settle_offset_v_ *= settle_decay;
    switch (mode_) {
      case Mode::resetting:
        truth_.lost_in_dead_c += q;
        v_cap_ = 0.0;
        --reset_left_;
        break;
      case Mode::zeroing:
        truth_.lost_in_dead_c += q;  // the relay shorts the input: the cup's charge goes to ground
        [[fallthrough]];
      case Mode::live: {
        const double input_rate = mode_ == Mode::live ? -q / dt / fe.c_farad : 0.0;
        const double rate = input_rate + drift_v_per_s_;
        if (tau_r2 > 0) v_cap_ = v_cap_ * leak_factor_ + rate * tau_r2 * (1.0 - leak_factor_);
        else v_cap_ += rate * dt;
        const double out_now = fe.offset_v + v_cap_;
        if (mode_ == Mode::live && std::fabs(out_now) >= fe.reset_threshold_v) reset_requested_ = true;
        break;
      }
    }
    ++truth_.samples;
  }
  if (index_ >= total_samples_) {
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
