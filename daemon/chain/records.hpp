#pragma once
// Values the measurement chain produces, handed downstream (storage, API).
// All voltages are integrator output volts; quantities are in the channel's SI
// unit (Calibration::unit()). Plain data, no behaviour.
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

namespace accrue::chain {

namespace segment_flag {
inline constexpr std::uint32_t clipped = 0x01;        // output reached the clip level: delta is a lower bound
inline constexpr std::uint32_t gap_estimated = 0x02;  // the dead time before it is an estimate from rates
inline constexpr std::uint32_t no_baseline = 0x04;    // no drift fit was available: drift not removed
inline constexpr std::uint32_t provisional = 0x08;    // still open: values up to the last sample seen
inline constexpr std::uint32_t leak_corrected = 0x10; // R2 leak corrected with the exact time-domain relation
}  // namespace segment_flag

struct BaselineRecord {
  std::uint32_t ordinal = 0;  // 1, 2, ... within the run
  std::uint64_t first_index = 0;
  std::uint64_t last_index = 0;
  std::uint64_t samples = 0;
  double intercept_v = 0.0;  // at the window's mean time
  double slope_v_per_s = 0.0;
  double slope_se_v_per_s = 0.0;
  double residual_rms_v = 0.0;
  // Quadratic model only (0 otherwise): V = a + b*(t - t0) + c*(t - t0)^2, t0 the window's middle.
  double curvature_v_per_s2 = 0.0;
  double curvature_se_v_per_s2 = 0.0;
  double slope_curvature_cov = 0.0;
  bool quadratic = false;
  bool robust = false;           // Huber IRLS
  std::uint64_t downweighted = 0;  // robust fit: samples given less than full weight (glitches)
  bool quiet_window = false;     // from a user-marked quiet interval, not the zero relay
};

struct SegmentRecord {
  std::uint32_t ordinal = 0;  // 1, 2, ... within the run
  std::uint64_t first_index = 0;
  std::uint64_t last_index = 0;
  double start_v = 0.0;       // fitted output at first_index: the pedestal after the reset, removed by the delta
  double end_v = 0.0;         // fitted output at last_index
  double drift_v = 0.0;       // baseline slope * segment length, subtracted
  double gap_before_v = 0.0;  // drift-corrected estimate of the output change lost in the dead time before
  double gap_before_u_v = 0.0;
  double end_points_u_v = 0.0;  // standard uncertainty of end_v - start_v from the end fits
  double quantity = 0.0;        // (end_v - start_v - drift_v + gap_before_v) * quantity_per_volt
  std::uint32_t baseline_ordinal = 0;  // 0: none
  std::uint32_t flags = 0;
  double total_after = 0.0;  // running total including this segment
  double total_u_after = 0.0;
  // Summary (not part of the total's arithmetic).
  double leak_v = 0.0;        // leak correction included in end_v (0 without R2 or when switched off)
  double duration_s = 0.0;
  double rate = 0.0;          // mean input rate over the segment, quantity per second, drift removed
  double min_v = 0.0, max_v = 0.0;  // raw output extremes while integrating
};

// Something the chain noticed that the daemon should log as an event.
struct ChainEvent {
  std::string kind;  // "saturation", "baseline_rejected"
  std::uint64_t sample_index = 0;
  std::string detail;
};

struct SeriesPoint {
  std::uint64_t first_index = 0;
  std::uint32_t samples = 0;
  double min_v = 0.0;
  double max_v = 0.0;
  double mean_v = 0.0;
  double last_v = 0.0;
  double total = 0.0;  // running total at the bucket's last sample
  double total_u = 0.0;
  double rate = 0.0;   // change of the total over the bucket per second (quantity/s); 0 for the first bucket
};

// Everything a restart needs to continue a total exactly where it was.
struct ChainState {
  std::uint64_t last_index = 0;
  double total_v = 0.0;  // drift-corrected output change, summed over segments and gaps
  double end_points_var_v2 = 0.0;
  double gap_var_v2 = 0.0;
  double closed_drift_var_v2 = 0.0;  // sum over finished baselines of (se * span)^2
  bool has_baseline = false;
  double slope_v_per_s = 0.0;
  double slope_se_v_per_s = 0.0;
  double drift_span_s = 0.0;  // time the current baseline has been applied over (d drift / d slope)
  // Quadratic baselines: the curvature, its variance and covariance with the
  // slope, the fit's time origin, and d drift / d curvature summed over the span.
  double curvature_v_per_s2 = 0.0;
  double curvature_var = 0.0;
  double slope_curvature_cov = 0.0;
  double baseline_t0_s = 0.0;
  double drift_curvature_span_s2 = 0.0;
  std::uint32_t baseline_ordinal = 0;
  bool has_previous_end = false;
  std::uint64_t previous_end_index = 0;
  double previous_end_rate_v_per_s = 0.0;
  double previous_end_rate_se = 0.0;
  bool previous_end_changed = false;  // the input changed in the previous segment's last interval
  std::uint32_t segments = 0;
  std::uint32_t flags = 0;  // union of segment flags so far
  // For contrast only: segment deltas summed with no drift removal and no
  // dead-time estimates (what stitching alone would report).
  double stitched_uncorrected_v = 0.0;
};

struct TotalSnapshot {
  std::uint64_t last_index = 0;
  // The open segment as if it ended at last_index (flag provisional); its
  // ordinal is the one the segment will keep when it closes.
  std::optional<SegmentRecord> open_segment;
  double total = 0.0;
  double std_uncertainty = 0.0;  // k = 1
  std::uint32_t segments = 0;
  std::uint32_t flags = 0;
  ChainState state;  // the state as if the open segment were closed at last_index
};

struct ChainOutput {
  std::vector<SeriesPoint> series;
  std::vector<SegmentRecord> segments;
  std::vector<BaselineRecord> baselines;
  std::vector<ChainEvent> events;
  void clear() {
    series.clear();
    segments.clear();
    baselines.clear();
    events.clear();
  }
};

}  // namespace accrue::chain
