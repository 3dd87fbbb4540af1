#include "storage/rollup.hpp"

#include <algorithm>
#include <cmath>

namespace accrue::storage::rollup {

std::uint64_t width_samples(std::int64_t width_s, double sample_period_s) {
  if (!(sample_period_s > 0)) return 1;
  const double n = std::llround(double(width_s) / sample_period_s);
  return n < 1 ? 1 : std::uint64_t(n);
}

void Bucket::fold(const chain::SeriesPoint& p) {
  if (points == 0) {
    first_index = p.first_index;
    min_v = p.min_v;
    max_v = p.max_v;
  } else {
    min_v = std::min(min_v, p.min_v);
    max_v = std::max(max_v, p.max_v);
  }
  last_point_index = p.first_index;
  ++points;
  samples += p.samples;
  sum_v += p.mean_v * double(p.samples);
  last_v = p.last_v;
  total = p.total;
  total_u = p.total_u;
}

void Bucket::merge_newer(const Bucket& n) {
  if (points == 0) {
    *this = n;
    return;
  }
  min_v = std::min(min_v, n.min_v);
  max_v = std::max(max_v, n.max_v);
  last_point_index = n.last_point_index;
  points += n.points;
  samples += n.samples;
  sum_v += n.sum_v;
  last_v = n.last_v;
  total = n.total;
  total_u = n.total_u;
}

std::vector<Bucket> fold_points(std::span<const chain::SeriesPoint> points, double sample_period_s) {
  std::vector<Bucket> out;
  for (std::int64_t width_s : kWidthsS) {
    const std::uint64_t w = width_samples(width_s, sample_period_s);
    Bucket current;
    for (const auto& p : points) {
      const std::uint64_t b = p.first_index / w;
      if (current.points > 0 && current.bucket != b) {
        out.push_back(current);
        current = Bucket{};
      }
      current.width_s = width_s;
      current.bucket = b;
      current.fold(p);
    }
    if (current.points > 0) out.push_back(current);
  }
  return out;
}

std::optional<std::int64_t> choose_tier(std::uint64_t from_index, std::uint64_t to_index, std::size_t max_points,
                                        double sample_period_s, double series_interval_s) {
  if (to_index < from_index) return std::nullopt;
  const std::size_t want = std::max<std::size_t>(1, max_points);
  for (auto it = kWidthsS.rbegin(); it != kWidthsS.rend(); ++it) {
    // A tier no coarser than the series points themselves gains nothing.
    if (double(*it) <= series_interval_s * 1.0000001) break;
    const std::uint64_t w = width_samples(*it, sample_period_s);
    const std::uint64_t buckets = to_index / w - from_index / w + 1;
    if (buckets >= want) return *it;
  }
  return std::nullopt;
}

}  // namespace accrue::storage::rollup
