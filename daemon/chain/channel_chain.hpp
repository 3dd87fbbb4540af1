#pragma once
// ChannelChain is the measurement chain of one channel: ADC codes in, drift-
// corrected, reset-stitched integrated quantity out. It takes sample runs that
// share one board status (a protocol SampleBlock's slice for this channel) in
// increasing sample index order, and appends what they complete to a
// ChainOutput: series points, closed segments, new baselines.
//
// Stages, in data-flow order: calibration (codes -> volts); leak correction
// (with R2 across C and leak_correction on, the chain works on
// W = V + (1/(R2*C))*∫V dt, the trapezoid integral restarted at each segment
// and zero window, so that dW = -∫Vin dt/(R1*C) exactly: DESIGN.md §4);
// segmentation (reset-active and zero-relay blocks are dead but for their
// first sample, which was converted before the switch closed and ends the
// open segment, PROTOCOL.md §3.2; a settle time after each is dead too; the
// rest forms segments; outputs within the clip level mark the segment
// clipped and raise a "saturation" event); baseline
// (a linear or quadratic least-squares fit, optionally Huber-robust, on each
// zero-relay window and each configured quiet window; every new window
// re-fits, and a segment uses the baseline current when it closes);
// accumulation (segment deltas minus drift plus estimates for each dead
// interval from the rates either side, with the uncertainty: end-fit errors
// and gap estimates add in quadrature, the drift error is summed linearly over
// all segments sharing one fit and in quadrature between fits).
//
// Time is the board's sample index times its sample period, never host time.
// No I/O, no clocks, no randomness: the same input gives the same output.
#include <cstdint>
#include <limits>
#include <optional>
#include <vector>

#include "daemon/chain/baseline_fit.hpp"
#include "daemon/chain/calibration.hpp"
#include "daemon/chain/end_windows.hpp"
#include "daemon/chain/linear_fit.hpp"
#include "daemon/chain/records.hpp"

namespace accrue::chain {

struct ChainSettings {
  double sample_period_s = 1e-3;
  double settle_s = 0.002;           // after a reset or zero window, before integrating again
  std::size_t end_window = 16;       // samples fitted at each end of a segment (short: the input may change)
  double series_interval_s = 1.0;    // one SeriesPoint per this much board time
  double clip_fraction = 0.98;       // |V| at or above this fraction of full scale is clipping
  std::size_t min_baseline_samples = 16;
  bool leak_correction = true;       // applies only when the calibration has R2 > 0
  BaselineModel baseline_model = BaselineModel::linear;
  BaselineRobust baseline_robust = BaselineRobust::none;
  std::size_t max_baseline_points = 65536;  // memory bound per zero window (thinned beyond)
  // Intervals the user marks as quiet (input known to be zero), in sample
  // indices [first, last]; fitted like zero windows while the segment goes on.
  struct QuietWindow {
    std::uint64_t first_index = 0;
    std::uint64_t last_index = 0;
  };
  std::vector<QuietWindow> quiet_windows;
};

class ChannelChain {
 public:
  ChannelChain(Calibration calibration, ChainSettings settings);

  // Continues a total from a stored state (daemon restart within a run).
  void resume(const ChainState& state);

  // `codes` holds `count` samples for this channel, `stride` apart, the first at `first_index`.
  void process(std::uint64_t first_index, std::uint8_t status, const std::int32_t* codes, std::size_t count,
               std::size_t stride, ChainOutput& out);
  // Samples were lost before the next process() call (a sample-index gap:
  // frames dropped, corrupted, or sent while the cable was out). The front
  // end kept integrating, but a reset may have happened unseen in the gap, so
  // the open segment ends at the last sample seen and the next one opens after
  // a settle time; what the gap held is estimated from the rates either side,
  // like any dead time, with its uncertainty.
  void on_missing_samples(ChainOutput& out);
  // The run ended: close the open segment and the open series bucket.
  void finish(ChainOutput& out);

  // Adds a quiet interval while the chain runs (an API mark). Only samples
  // not yet processed can feed its fit: returns the first index the fit will
  // use (the later of first_index and the next sample), or nullopt when the
  // whole interval is already behind the chain.
  std::optional<std::uint64_t> add_quiet_window(ChainSettings::QuietWindow window);

  // The total as if the open segment ended at the last sample seen.
  TotalSnapshot snapshot() const;

  const Calibration& calibration() const { return calibration_; }
  const ChainSettings& settings() const { return settings_; }
  std::uint64_t samples_seen() const { return samples_seen_; }

 private:
  enum class Mode { dead, settling, live };
  void enter_dead(bool zero_window);
  // AdcCalibration::to_volts with volts_per_code_ computed once (it is per sample).
  double to_volts(std::int32_t code) const { return double(code - calibration_.adc.zero_code) * volts_per_code_; }
  // Every sample goes into the open series bucket.
  void add_to_series(std::uint64_t index, double v, ChainOutput& out);
  // A sample of the open segment (opens one when none is open).
  void add_live(std::uint64_t index, double v, ChainOutput& out);
  void close_zero_window(ChainOutput& out);
  void close_quiet_window(ChainOutput& out);
  void adopt_baseline(const BaselineEstimate& e, std::uint64_t first, std::uint64_t last, bool quiet, ChainOutput& out);
  // The leak-corrected value of raw output v at index (restarts when `restart`).
  double leak_step(std::uint64_t index, double v, bool restart);
  double drift_var_v2(const ChainState& s) const;
  void close_segment(ChainOutput& out);
  void flush_series(ChainOutput& out);
  // Accounts for the open segment in `state`; returns the segment record.
  SegmentRecord account_open_segment(ChainState& state) const;
  double total_uncertainty_v(const ChainState& state) const;

  Calibration calibration_;
  ChainSettings settings_;
  double volts_per_code_;
  double clip_v_;
  std::uint64_t settle_samples_;
  std::uint64_t series_samples_;

  Mode mode_ = Mode::live;
  std::uint64_t settle_left_ = 0;
  bool in_zero_window_ = false;
  BaselineFit zero_fit_;
  std::uint64_t zero_first_ = 0, zero_last_ = 0;
  bool in_quiet_ = false;
  std::size_t quiet_next_ = 0;  // next quiet window to look for (sorted by first_index)
  BaselineFit quiet_fit_;
  std::uint64_t quiet_first_ = 0, quiet_last_ = 0;

  bool leak_on_ = false;
  double leak_inv_tau_ = 0.0;  // 1/(R2*C)
  double leak_integral_v_s_ = 0.0;
  double leak_prev_v_ = 0.0;
  std::uint64_t leak_prev_index_ = 0;
  double seg_min_v_ = 0.0, seg_max_v_ = 0.0;
  bool clip_event_sent_ = false;
  double last_series_total_ = 0.0;
  bool have_series_total_ = false;

  EndWindows windows_;
  std::uint32_t open_flags_ = 0;
  ChainState state_;
  std::uint64_t samples_seen_ = 0;
  std::uint64_t last_index_ = 0;

  // Series bucket being filled.
  bool bucket_open_ = false;
  std::uint64_t bucket_first_ = 0, bucket_end_ = 0;  // [first, end) in sample index
  std::uint32_t bucket_n_ = 0;
  double bucket_min_ = 0, bucket_max_ = 0, bucket_sum_ = 0, bucket_last_ = 0;
};

}  // namespace accrue::chain
