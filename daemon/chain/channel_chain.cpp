#include "daemon/chain/channel_chain.hpp"

#include <algorithm>
#include <cmath>

#include "protocol/messages.hpp"

namespace accrue::chain {

namespace status_bit = protocol::status_bit;

ChannelChain::ChannelChain(Calibration calibration, ChainSettings settings)
    : calibration_(calibration),
      settings_(settings),
      volts_per_code_(calibration.adc.volts_per_code()),
      clip_v_(calibration.adc.full_scale_v / calibration.adc.gain * settings.clip_fraction),
      settle_samples_(std::uint64_t(std::ceil(settings.settle_s / settings.sample_period_s - 1e-9))),
      series_samples_(std::max<std::uint64_t>(1, std::uint64_t(std::llround(settings.series_interval_s /
                                                                           settings.sample_period_s)))),
      windows_(settings.end_window) {}

void ChannelChain::resume(const ChainState& state) {
  state_ = state;
  // The interval since the stored state is dead time: the next segment's gap covers it.
  mode_ = Mode::settling;
  settle_left_ = settle_samples_;
}

void ChannelChain::enter_dead(bool zero_window) {
  mode_ = Mode::dead;
  if (zero_window && !in_zero_window_) {
    in_zero_window_ = true;
    zero_fit_ = LinearFit{};
  }
}

void ChannelChain::process(std::uint64_t first_index, std::uint8_t status, const std::int32_t* codes,
                           std::size_t count, std::size_t stride, ChainOutput& out) {
  if (count == 0) return;
  const bool resetting = status & status_bit::reset_active;
  const bool zeroing = status & status_bit::zero_relay;
  if (resetting || zeroing) {
    if (!windows_.empty()) close_segment(out);
    if (in_zero_window_ && !zeroing) close_zero_window(out);
    enter_dead(zeroing);
  } else {
    if (in_zero_window_) close_zero_window(out);
    if (mode_ == Mode::dead) {
      mode_ = Mode::settling;
      settle_left_ = settle_samples_;
    }
  }
  if (status & status_bit::overload) open_flags_ |= segment_flag::clipped;

  const double period = settings_.sample_period_s;
  for (std::size_t k = 0; k < count; ++k) {
    const std::uint64_t index = first_index + k;
    const double v = double(codes[k * stride] - calibration_.adc.zero_code) * volts_per_code_;
    if (bucket_open_ && index >= bucket_end_) flush_series(out);
    if (!bucket_open_) {
      bucket_open_ = true;
      bucket_first_ = index;
      bucket_end_ = (index / series_samples_ + 1) * series_samples_;
      bucket_n_ = 0;
      bucket_min_ = bucket_max_ = v;
      bucket_sum_ = 0;
    }
    ++bucket_n_;
    bucket_min_ = std::min(bucket_min_, v);
    bucket_max_ = std::max(bucket_max_, v);
    bucket_sum_ += v;
    bucket_last_ = v;
    last_index_ = index;
    ++samples_seen_;

    if (mode_ == Mode::dead) {
      if (in_zero_window_) {
        if (zero_fit_.size() == 0) zero_first_ = index;
        zero_last_ = index;
        zero_fit_.add(double(index) * period, v);
      }
      continue;
    }
    if (mode_ == Mode::settling) {
      if (settle_left_ > 0) {
        --settle_left_;
        continue;
      }
      mode_ = Mode::live;
    }
    if (std::fabs(v) >= clip_v_) open_flags_ |= segment_flag::clipped;
    windows_.add(index, v);
  }
  state_.last_index = std::max(state_.last_index, last_index_);
}

void ChannelChain::close_zero_window(ChainOutput& out) {
  in_zero_window_ = false;
  if (zero_fit_.size() < settings_.min_baseline_samples) return;
  const LineEstimate line = zero_fit_.estimate();
  if (state_.has_baseline) {
    const double d = state_.slope_se_v_per_s * state_.drift_span_s;
    state_.closed_drift_var_v2 += d * d;
  }
  state_.has_baseline = true;
  state_.slope_v_per_s = line.slope;
  state_.slope_se_v_per_s = line.slope_se;
  state_.drift_span_s = 0.0;
  ++state_.baseline_ordinal;
  BaselineRecord b;
  b.ordinal = state_.baseline_ordinal;
  b.first_index = zero_first_;
  b.last_index = zero_last_;
  b.samples = zero_fit_.size();
  b.intercept_v = line.intercept;
  b.slope_v_per_s = line.slope;
  b.slope_se_v_per_s = line.slope_se;
  b.residual_rms_v = line.residual_rms;
  out.baselines.push_back(b);
}

SegmentRecord ChannelChain::account_open_segment(ChainState& s) const {
  const double period = settings_.sample_period_s;
  const EndEstimate start = windows_.start(period);
  const EndEstimate end = windows_.end(period);
  SegmentRecord r;
  r.first_index = windows_.first_index();
  r.last_index = windows_.last_index();
  r.start_v = start.value_v;
  r.end_v = end.value_v;
  r.flags = open_flags_;
  const double slope = s.has_baseline ? s.slope_v_per_s : 0.0;
  if (!s.has_baseline) r.flags |= segment_flag::no_baseline;
  const double length_s = double(r.last_index - r.first_index) * period;
  r.drift_v = slope * length_s;
  double span_s = length_s;
  if (s.has_previous_end && r.first_index > s.previous_end_index) {
    // What the dead time lost: the mean of the rates either side, minus drift. Its
    // uncertainty: the true mean rate lies between the two (uniform, range/sqrt(12)),
    // plus the error of the two fitted rates.
    const double gap_s = double(r.first_index - s.previous_end_index) * period;
    const double r1 = s.previous_end_rate_v_per_s, r2 = start.rate_v_per_s;
    r.gap_before_v = ((r1 + r2) / 2.0 - slope) * gap_s;
    const double spread = std::fabs(r1 - r2) / std::sqrt(12.0);
    const double fit = std::hypot(s.previous_end_rate_se, start.rate_se_v_per_s) / 2.0;
    r.gap_before_u_v = std::hypot(spread, fit) * gap_s;
    r.flags |= segment_flag::gap_estimated;
    span_s += gap_s;
  }
  r.end_points_u_v = std::hypot(start.value_se_v, end.value_se_v);
  const double delta_v = r.end_v - r.start_v - r.drift_v + r.gap_before_v;
  r.quantity = delta_v * calibration_.quantity_per_volt();
  r.baseline_ordinal = s.has_baseline ? s.baseline_ordinal : 0;

  s.total_v += delta_v;
  s.stitched_uncorrected_v += r.end_v - r.start_v;
  s.end_points_var_v2 += r.end_points_u_v * r.end_points_u_v;
  s.gap_var_v2 += r.gap_before_u_v * r.gap_before_u_v;
  s.drift_span_s += span_s;
  s.has_previous_end = true;
  s.previous_end_index = r.last_index;
  s.previous_end_rate_v_per_s = end.rate_v_per_s;
  s.previous_end_rate_se = end.rate_se_v_per_s;
  s.last_index = std::max(s.last_index, r.last_index);
  ++s.segments;
  s.flags |= r.flags;
  r.ordinal = s.segments;
  const double k = std::fabs(calibration_.quantity_per_volt());
  r.total_after = s.total_v * calibration_.quantity_per_volt();
  r.total_u_after = total_uncertainty_v(s) * k;
  return r;
}

double ChannelChain::total_uncertainty_v(const ChainState& s) const {
  // Drift error is fully correlated within one baseline's span (linear sum),
  // independent between baselines (quadrature).
  const double drift = s.slope_se_v_per_s * s.drift_span_s;
  return std::sqrt(s.end_points_var_v2 + s.gap_var_v2 + s.closed_drift_var_v2 + drift * drift);
}

void ChannelChain::close_segment(ChainOutput& out) {
  if (windows_.empty()) return;
  out.segments.push_back(account_open_segment(state_));
  windows_.clear();
  open_flags_ = 0;
}

void ChannelChain::flush_series(ChainOutput& out) {
  if (!bucket_open_) return;
  const TotalSnapshot t = snapshot();
  SeriesPoint p;
  p.first_index = bucket_first_;
  p.samples = bucket_n_;
  p.min_v = bucket_min_;
  p.max_v = bucket_max_;
  p.mean_v = bucket_sum_ / double(bucket_n_);
  p.last_v = bucket_last_;
  p.total = t.total;
  p.total_u = t.std_uncertainty;
  out.series.push_back(p);
  bucket_open_ = false;
}

void ChannelChain::finish(ChainOutput& out) {
  if (in_zero_window_) close_zero_window(out);
  close_segment(out);
  flush_series(out);
}

TotalSnapshot ChannelChain::snapshot() const {
  TotalSnapshot t;
  t.state = state_;
  if (!windows_.empty()) {
    t.open_segment = account_open_segment(t.state);
    t.open_segment->flags |= segment_flag::provisional;
  }
  t.state.last_index = std::max(t.state.last_index, last_index_);
  t.last_index = t.state.last_index;
  t.total = t.state.total_v * calibration_.quantity_per_volt();
  t.std_uncertainty = total_uncertainty_v(t.state) * std::fabs(calibration_.quantity_per_volt());
  t.segments = t.state.segments;
  t.flags = t.state.flags | (windows_.empty() ? 0u : segment_flag::provisional);
  return t;
}

}  // namespace accrue::chain
