#include "daemon/chain/channel_chain.hpp"

#include <algorithm>
#include <cmath>

#include "protocol/messages.hpp"

namespace accrue::chain {

namespace status_bit = protocol::status_bit;

ChannelChain::ChannelChain(Calibration calibration, ChainSettings settings)
    : calibration_(calibration),
      settings_(std::move(settings)),
      volts_per_code_(calibration.adc.volts_per_code()),
      clip_v_(calibration.adc.full_scale_output_v() * settings_.clip_fraction),
      settle_samples_(std::uint64_t(std::ceil(settings_.settle_s / settings_.sample_period_s - 1e-9))),
      series_samples_(std::max<std::uint64_t>(1, std::uint64_t(std::llround(settings_.series_interval_s /
                                                                           settings_.sample_period_s)))),
      zero_fit_(settings_.max_baseline_points),
      quiet_fit_(settings_.max_baseline_points),
      windows_(settings_.end_window, calibration.adc.quantisation_sigma_v()) {
  leak_on_ = settings_.leak_correction && calibration_.front_end.r2_ohm > 0;
  if (leak_on_) leak_inv_tau_ = 1.0 / (calibration_.front_end.r2_ohm * calibration_.front_end.c_farad);
  std::sort(settings_.quiet_windows.begin(), settings_.quiet_windows.end(),
            [](const auto& a, const auto& b) { return a.first_index < b.first_index; });
}

std::optional<std::uint64_t> ChannelChain::add_quiet_window(ChainSettings::QuietWindow window) {
  const std::uint64_t next = samples_seen_ > 0 ? last_index_ + 1 : 0;
  window.first_index = std::max(window.first_index, next);
  if (window.first_index > window.last_index) return std::nullopt;
  // Windows already passed all start at or before last_index_, so the new one
  // sorts at or after quiet_next_ and the scan in process() finds it.
  auto& quiet = settings_.quiet_windows;
  const auto at = std::upper_bound(quiet.begin(), quiet.end(), window,
                                   [](const auto& a, const auto& b) { return a.first_index < b.first_index; });
  quiet.insert(at, window);
  return window.first_index;
}

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
    zero_fit_.clear();
  }
}

double ChannelChain::leak_step(std::uint64_t index, double v, bool restart) {
  if (!leak_on_) return v;
  if (restart) {
    leak_integral_v_s_ = 0.0;
  } else {
    // Trapezoid rule over the interval since the previous sample (one period
    // unless samples were lost); its error is O((dt/tau)^2) per step.
    const double dt = double(index - leak_prev_index_) * settings_.sample_period_s;
    leak_integral_v_s_ += 0.5 * (leak_prev_v_ + v) * dt;
  }
  leak_prev_v_ = v;
  leak_prev_index_ = index;
  return v + leak_integral_v_s_ * leak_inv_tau_;
}

void ChannelChain::process(std::uint64_t first_index, std::uint8_t status, const std::int32_t* codes,
                           std::size_t count, std::size_t stride, ChainOutput& out) {
  if (count == 0) return;
  const bool resetting = status & status_bit::reset_active;
  const bool zeroing = status & status_bit::zero_relay;
  const bool overload = status & status_bit::overload;
  std::size_t k = 0;
  if (resetting || zeroing) {
    // PROTOCOL.md §3.2: the switch (or relay) closes just after the first
    // sample of the block is converted, so that sample is the output the
    // reset is about to discharge and ends the open segment. Without it the
    // interval up to it would be dead time, estimated from the rates either
    // side; at a threshold reset the input is usually what just pushed the
    // output over, so such estimates would read low at nearly every reset.
    if (mode_ == Mode::live && samples_seen_ > 0 && first_index == last_index_ + 1) {
      const double v = to_volts(codes[0]);
      if (overload) open_flags_ |= segment_flag::clipped;
      add_to_series(first_index, v, out);
      add_live(first_index, v, out);
      k = 1;
    }
    if (in_quiet_) close_quiet_window(out);
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
  if (overload) open_flags_ |= segment_flag::clipped;

  const double period = settings_.sample_period_s;
  for (; k < count; ++k) {
    const std::uint64_t index = first_index + k;
    const double v = to_volts(codes[k * stride]);
    add_to_series(index, v, out);
    if (mode_ == Mode::dead) {
      if (in_zero_window_) {
        const bool first = zero_fit_.seen() == 0;
        if (first) zero_first_ = index;
        zero_last_ = index;
        zero_fit_.add(double(index) * period, leak_step(index, v, first));
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
    add_live(index, v, out);
  }
  state_.last_index = std::max(state_.last_index, last_index_);
}

void ChannelChain::add_to_series(std::uint64_t index, double v, ChainOutput& out) {
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
}

void ChannelChain::add_live(std::uint64_t index, double v, ChainOutput& out) {
  const bool opening = windows_.empty();
  const double w = leak_step(index, v, opening);
  if (opening) {
    seg_min_v_ = seg_max_v_ = v;
    clip_event_sent_ = false;
  }
  seg_min_v_ = std::min(seg_min_v_, v);
  seg_max_v_ = std::max(seg_max_v_, v);
  if (std::fabs(v) >= clip_v_) open_flags_ |= segment_flag::clipped;
  if ((open_flags_ & segment_flag::clipped) && !clip_event_sent_) {
    clip_event_sent_ = true;
    out.events.push_back({"saturation", index,
                          "output " + std::to_string(v) + " V within the clip level " + std::to_string(clip_v_) +
                              " V (or the board reported overload): segment delta is a lower bound"});
  }
  windows_.add(index, w);

  // Quiet windows marked by the user: the segment goes on, and the samples
  // also feed a baseline fit.
  const auto& quiet = settings_.quiet_windows;
  while (quiet_next_ < quiet.size() && quiet[quiet_next_].last_index < index && !in_quiet_) ++quiet_next_;
  if (in_quiet_ && index > quiet_last_) close_quiet_window(out);
  if (!in_quiet_ && quiet_next_ < quiet.size() && index >= quiet[quiet_next_].first_index &&
      index <= quiet[quiet_next_].last_index) {
    in_quiet_ = true;
    quiet_fit_.clear();
    quiet_first_ = index;
    quiet_last_ = quiet[quiet_next_].last_index;
  }
  if (in_quiet_) {
    quiet_fit_.add(double(index) * settings_.sample_period_s, w);
    if (index == quiet_last_) close_quiet_window(out);
  }
}

void ChannelChain::adopt_baseline(const BaselineEstimate& e, std::uint64_t first, std::uint64_t last, bool quiet,
                                  ChainOutput& out) {
  if (state_.has_baseline) state_.closed_drift_var_v2 += drift_var_v2(state_);
  state_.has_baseline = true;
  state_.slope_v_per_s = e.b_v_per_s;
  state_.slope_se_v_per_s = std::sqrt(e.var_b);
  state_.curvature_v_per_s2 = e.c_v_per_s2;
  state_.curvature_var = e.var_c;
  state_.slope_curvature_cov = e.cov_bc;
  state_.baseline_t0_s = e.t0_s;
  state_.drift_span_s = 0.0;
  state_.drift_curvature_span_s2 = 0.0;
  ++state_.baseline_ordinal;
  BaselineRecord b;
  b.ordinal = state_.baseline_ordinal;
  b.first_index = first;
  b.last_index = last;
  b.samples = e.n;
  b.intercept_v = e.a_v;
  b.slope_v_per_s = e.b_v_per_s;
  b.slope_se_v_per_s = std::sqrt(e.var_b);
  b.residual_rms_v = e.residual_rms_v;
  b.quadratic = settings_.baseline_model == BaselineModel::quadratic;
  b.curvature_v_per_s2 = e.c_v_per_s2;
  b.curvature_se_v_per_s2 = std::sqrt(e.var_c);
  b.slope_curvature_cov = e.cov_bc;
  b.robust = settings_.baseline_robust == BaselineRobust::huber;
  b.downweighted = e.downweighted;
  b.quiet_window = quiet;
  out.baselines.push_back(b);
}

void ChannelChain::close_zero_window(ChainOutput& out) {
  in_zero_window_ = false;
  if (zero_fit_.seen() < settings_.min_baseline_samples) return;
  const BaselineEstimate e = zero_fit_.fit(settings_.baseline_model, settings_.baseline_robust);
  if (!e.ok) {
    out.events.push_back({"baseline_rejected", zero_first_, "zero window could not be fitted"});
    return;
  }
  adopt_baseline(e, zero_first_, zero_last_, false, out);
}

void ChannelChain::close_quiet_window(ChainOutput& out) {
  in_quiet_ = false;
  const std::uint64_t last = std::min(quiet_last_, last_index_);
  ++quiet_next_;
  if (quiet_fit_.seen() < settings_.min_baseline_samples) return;
  const BaselineEstimate e = quiet_fit_.fit(settings_.baseline_model, settings_.baseline_robust);
  if (!e.ok) return;
  adopt_baseline(e, quiet_first_, last, true, out);
}

double ChannelChain::drift_var_v2(const ChainState& s) const {
  // drift error = J_b*db + J_c*dc over everything this fit was applied to
  // (fully correlated, so the J's are linear sums); var = J' Cov J.
  const double jb = s.drift_span_s, jc = s.drift_curvature_span_s2;
  const double var_b = s.slope_se_v_per_s * s.slope_se_v_per_s;
  return std::max(0.0, jb * jb * var_b + 2.0 * jb * jc * s.slope_curvature_cov + jc * jc * s.curvature_var);
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
  r.flags = open_flags_ | (leak_on_ ? segment_flag::leak_corrected : 0u);
  r.min_v = seg_min_v_;
  r.max_v = seg_max_v_;
  r.leak_v = leak_on_ ? leak_integral_v_s_ * leak_inv_tau_ : 0.0;
  if (!s.has_baseline) r.flags |= segment_flag::no_baseline;
  const double t1 = double(r.first_index) * period, t2 = double(r.last_index) * period;
  const double length_s = t2 - t1;
  r.duration_s = length_s;
  // Drift over the segment from the baseline polynomial (the quadratic term is
  // 0 for a linear fit): b*(t2 - t1) + c*((t2 - t0)^2 - (t1 - t0)^2).
  double jb = 0.0, jc = 0.0;
  if (s.has_baseline) {
    const double d1 = t1 - s.baseline_t0_s, d2 = t2 - s.baseline_t0_s;
    jb = length_s;
    jc = d2 * d2 - d1 * d1;
    r.drift_v = s.slope_v_per_s * jb + s.curvature_v_per_s2 * jc;
  }
  if (s.has_previous_end && r.first_index > s.previous_end_index) {
    // What the dead time lost: the mean of the rates either side, minus the
    // drift rate at the gap's middle. Its uncertainty: the true mean rate lies
    // between the two (uniform, range/sqrt(12)), plus the error of the two
    // fitted rates.
    const double gap_s = double(r.first_index - s.previous_end_index) * period;
    const double tm = (double(s.previous_end_index) * period + t1) / 2.0;
    const double slope = s.has_baseline ? s.slope_v_per_s + 2.0 * s.curvature_v_per_s2 * (tm - s.baseline_t0_s) : 0.0;
    const double r1 = s.previous_end_rate_v_per_s, r2 = start.rate_v_per_s;
    const double spread = std::fabs(r1 - r2) / std::sqrt(12.0);
    // Where the input changed in the interval next to the gap on one side
    // only, that side's rate is of a part-interval and the gap held the other
    // side's level (a spill that began just before a reset, or ended just
    // after): the mean of the two would miss by a quarter of the difference
    // or more, with one sign at every such reset.
    double rate = (r1 + r2) / 2.0;
    double fit = std::hypot(s.previous_end_rate_se, start.rate_se_v_per_s) / 2.0;
    if (s.previous_end_changed && !start.changed_at_end) {
      rate = r2;
      fit = start.rate_se_v_per_s;
    } else if (start.changed_at_end && !s.previous_end_changed) {
      rate = r1;
      fit = s.previous_end_rate_se;
    }
    r.gap_before_v = (rate - slope) * gap_s;
    r.gap_before_u_v = std::hypot(spread, fit) * gap_s;
    r.flags |= segment_flag::gap_estimated;
    if (s.has_baseline) {
      jb += gap_s;
      jc += 2.0 * (tm - s.baseline_t0_s) * gap_s;
    }
  }
  r.end_points_u_v = std::hypot(start.value_se_v, end.value_se_v);
  const double delta_v = r.end_v - r.start_v - r.drift_v + r.gap_before_v;
  const double qpv = calibration_.quantity_per_volt();
  r.quantity = delta_v * qpv;
  r.rate = length_s > 0 ? (r.end_v - r.start_v - r.drift_v) * qpv / length_s : 0.0;
  r.baseline_ordinal = s.has_baseline ? s.baseline_ordinal : 0;

  s.total_v += delta_v;
  s.stitched_uncorrected_v += r.end_v - r.start_v;
  s.end_points_var_v2 += r.end_points_u_v * r.end_points_u_v;
  s.gap_var_v2 += r.gap_before_u_v * r.gap_before_u_v;
  s.drift_span_s += jb;
  s.drift_curvature_span_s2 += jc;
  s.has_previous_end = true;
  s.previous_end_index = r.last_index;
  s.previous_end_rate_v_per_s = end.rate_v_per_s;
  s.previous_end_rate_se = end.rate_se_v_per_s;
  s.previous_end_changed = end.changed_at_end;
  s.last_index = std::max(s.last_index, r.last_index);
  ++s.segments;
  s.flags |= r.flags;
  r.ordinal = s.segments;
  r.total_after = s.total_v * qpv;
  r.total_u_after = total_uncertainty_v(s) * std::fabs(qpv);
  return r;
}

double ChannelChain::total_uncertainty_v(const ChainState& s) const {
  // Drift error is fully correlated within one baseline's span (linear sum),
  // independent between baselines (quadrature).
  return std::sqrt(s.end_points_var_v2 + s.gap_var_v2 + s.closed_drift_var_v2 + drift_var_v2(s));
}

void ChannelChain::on_missing_samples(ChainOutput& out) {
  if (mode_ == Mode::dead) return;  // a zero window or reset carries on; its own end handles it
  if (in_quiet_) close_quiet_window(out);
  close_segment(out);
  mode_ = Mode::settling;
  settle_left_ = settle_samples_;
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
  if (have_series_total_) p.rate = (t.total - last_series_total_) / (double(bucket_n_) * settings_.sample_period_s);
  last_series_total_ = t.total;
  have_series_total_ = true;
  out.series.push_back(p);
  bucket_open_ = false;
}

void ChannelChain::finish(ChainOutput& out) {
  if (in_zero_window_) close_zero_window(out);
  if (in_quiet_) close_quiet_window(out);
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
