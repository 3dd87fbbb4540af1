#pragma once
// ChannelChain is the measurement chain of one channel: ADC codes in, drift-
// corrected, reset-stitched integrated quantity out. It takes sample runs that
// share one board status (a protocol SampleBlock's slice for this channel) in
// increasing sample index order, and appends what they complete to a
// ChainOutput: series points, closed segments, new baselines.
//
// Stages, in data-flow order: calibration (codes -> volts); segmentation
// (reset-active and zero-relay blocks are dead, and so is a settle time after
// each; the rest forms segments); baseline (a least-squares line on each
// zero-relay window, whose slope is the drift); accumulation (segment deltas
// minus drift plus estimates for each dead interval, with the uncertainty).
//
// Time is the board's sample index times its sample period, never host time.
// No I/O, no clocks, no randomness: the same input gives the same output.
#include <cstdint>
#include <limits>

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
};

class ChannelChain {
 public:
  ChannelChain(Calibration calibration, ChainSettings settings);

  // Continues a total from a stored state (daemon restart within a run).
  void resume(const ChainState& state);

  // `codes` holds `count` samples for this channel, `stride` apart, the first at `first_index`.
  void process(std::uint64_t first_index, std::uint8_t status, const std::int32_t* codes, std::size_t count,
               std::size_t stride, ChainOutput& out);
  // The run ended: close the open segment and the open series bucket.
  void finish(ChainOutput& out);

  // The total as if the open segment ended at the last sample seen.
  TotalSnapshot snapshot() const;

  const Calibration& calibration() const { return calibration_; }
  const ChainSettings& settings() const { return settings_; }
  std::uint64_t samples_seen() const { return samples_seen_; }

 private:
  enum class Mode { dead, settling, live };
  void enter_dead(bool zero_window);
  void close_zero_window(ChainOutput& out);
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
  LinearFit zero_fit_;
  std::uint64_t zero_first_ = 0, zero_last_ = 0;

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
