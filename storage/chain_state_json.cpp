#include "storage/chain_state_json.hpp"

#include <nlohmann/json.hpp>

namespace accrue::storage {

#define ACCRUE_CHAIN_STATE_FIELDS(X)                                                                          \
  X(last_index) X(total_v) X(end_points_var_v2) X(gap_var_v2) X(closed_drift_var_v2) X(has_baseline)           \
  X(slope_v_per_s) X(slope_se_v_per_s) X(drift_span_s) X(baseline_ordinal) X(has_previous_end)               \
  X(previous_end_index) X(previous_end_rate_v_per_s) X(previous_end_rate_se) X(segments) X(flags) X(stitched_uncorrected_v)
// Added later; absent in older checkpoints (then 0 or false: a linear
// baseline, and no change of input seen at the previous segment's end).
#define ACCRUE_CHAIN_STATE_OPTIONAL_FIELDS(X) \
  X(curvature_v_per_s2) X(curvature_var) X(slope_curvature_cov) X(baseline_t0_s) X(drift_curvature_span_s2) \
  X(previous_end_changed)

std::string chain_state_to_json(const chain::ChainState& s) {
  nlohmann::json j;
#define X(f) j[#f] = s.f;
  ACCRUE_CHAIN_STATE_FIELDS(X)
  ACCRUE_CHAIN_STATE_OPTIONAL_FIELDS(X)
#undef X
  return j.dump();
}

std::optional<chain::ChainState> chain_state_from_json(const std::string& text) {
  const auto j = nlohmann::json::parse(text, nullptr, false);
  if (j.is_discarded() || !j.is_object()) return std::nullopt;
  chain::ChainState s;
#define X(f)                                                   \
  if (!j.contains(#f)) return std::nullopt;                    \
  if (!j[#f].is_number() && !j[#f].is_boolean()) return std::nullopt; \
  s.f = j[#f].get<decltype(s.f)>();
  ACCRUE_CHAIN_STATE_FIELDS(X)
#undef X
#define X(f)                                                        \
  if (j.contains(#f)) {                                             \
    if (!j[#f].is_number() && !j[#f].is_boolean()) return std::nullopt; \
    s.f = j[#f].get<decltype(s.f)>();                               \
  }
  ACCRUE_CHAIN_STATE_OPTIONAL_FIELDS(X)
#undef X
  return s;
}

}  // namespace accrue::storage
