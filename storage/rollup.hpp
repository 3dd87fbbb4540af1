#pragma once
// Rollup tiers: fixed bucket widths in seconds and the arithmetic that folds
// series points into buckets. Pure (no SQLite): the Writer stores what
// fold_points produces, the Reader picks a tier with choose_tier, and tests
// compare both with a brute-force aggregation.
//
// Neighbouring widths differ by at most 2.5x (the series points, 1 s by
// default, sit below the finest), so for any bucket of B samples there is a
// tier no wider than B and wider than B / 2.5: a window of N buckets reads at
// most about 2.5 N rows whatever its span. The finer tiers cost about 0.9
// rows per second per channel beside the series' 1 (docs/api.md).
#include <array>
#include <cstdint>
#include <optional>
#include <span>
#include <vector>

#include "daemon/chain/records.hpp"

namespace accrue::storage::rollup {

// Fine to coarse. Stores written before the 2 s .. 43200 s widths were added
// hold only 10, 60, 600, 3600, 21600 and 86400; readers probe a tier before
// using it (daemon/api/store_queries.cpp) and fall back to a finer one.
inline constexpr std::array<std::int64_t, 17> kWidthsS = {2,    5,    10,   20,    30,    60,    120,   300,  600,
                                                          1200, 1800, 3600, 7200, 14400, 21600, 43200, 86400};

// Samples per bucket of width_s at this sample period (at least 1).
std::uint64_t width_samples(std::int64_t width_s, double sample_period_s);

struct Bucket {
  std::int64_t width_s = 0;
  std::uint64_t bucket = 0;
  std::uint64_t first_index = 0;       // of the first point folded in
  std::uint64_t last_point_index = 0;  // first_index of the newest point folded in
  std::uint64_t points = 0;
  std::uint64_t samples = 0;
  double min_v = 0.0, max_v = 0.0, sum_v = 0.0, last_v = 0.0, total = 0.0, total_u = 0.0;
  void fold(const chain::SeriesPoint& p);       // p newer than everything folded so far
  void merge_newer(const Bucket& newer);        // `newer` covers later points of the same bucket
};

// One Bucket per (tier, bucket) that `points` (in index order) touch, each
// holding only these points' contribution.
std::vector<Bucket> fold_points(std::span<const chain::SeriesPoint> points, double sample_period_s);

// The coarsest width whose bucket count over [from_index, to_index] is at
// least max_points; nullopt: use series_point itself.
std::optional<std::int64_t> choose_tier(std::uint64_t from_index, std::uint64_t to_index, std::size_t max_points,
                                        double sample_period_s, double series_interval_s);

}  // namespace accrue::storage::rollup
