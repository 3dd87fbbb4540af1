#pragma once
// Reads a recorded run from an accrue database (tables run, baseline,
// segment, event of storage/schema.sql), opened read-only, and compares what
// was measured with what a plan predicts: drift rate, the output a segment
// starts from (offset plus pedestal), saturation (clipped segments, overload
// events) and the number of resets. Every SQLite return code is checked; a
// failure comes back as `error`, never as an exception.
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "tools/accrue/plan.hpp"

namespace accrue::client {

struct RecordedRun {
  std::int64_t run_id = 0;
  int channel = 0;
  double sample_period_s = 0;
  double duration_s = 0;  // first segment start to last segment end
  double live_s = 0;      // sum of segment lengths
  std::size_t baselines = 0;
  double drift_mean_v_per_s = 0, drift_min_v_per_s = 0, drift_max_v_per_s = 0;
  std::size_t segments = 0;
  double start_v_median = 0;  // of segments after the first
  double quantity_total = 0;
  double output_change_v = 0;  // sum over segments of end_v - start_v (input and drift)
  std::size_t clipped_segments = 0;
  std::size_t overload_events = 0;
  std::size_t reset_events = 0;
  std::size_t zero_windows = 0;
};

struct DbResult {
  std::string error;  // empty = ok
  RecordedRun run;
};

// run_id 0: the newest run.
DbResult read_recorded_run(const std::string& path, std::int64_t run_id, int channel);

struct Comparison {
  nlohmann::json json;
  std::string text;
  bool within_plan = true;  // no finding
};

Comparison compare_with_plan(const PlanInput& in, const Plan& p, const RecordedRun& r);

}  // namespace accrue::client
