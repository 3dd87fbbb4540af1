#include "daemon/clock_model.hpp"

#include <algorithm>
#include <cmath>

namespace accrue::daemon {

ClockModel::ClockModel(double sample_period_s, double bucket_s)
    : period_s_(sample_period_s),
      bucket_samples_(std::max<std::uint64_t>(1, std::uint64_t(std::llround(bucket_s / sample_period_s)))) {}

void ClockModel::clear() {
  have_origin_ = false;
  buckets_.clear();
  bucket_ids_.clear();
  pairs_ = 0;
}

void ClockModel::add(std::uint64_t index, double receive_unix) {
  if (!have_origin_) {
    have_origin_ = true;
    t0_ = receive_unix;
  }
  ++pairs_;
  const double residual = receive_unix - t0_ - double(index) * period_s_;
  const std::uint64_t id = index / bucket_samples_;
  if (!bucket_ids_.empty() && bucket_ids_.back() == id) {
    if (residual < buckets_.back().residual_s) buckets_.back() = {index, residual};
    return;
  }
  if (!bucket_ids_.empty() && id < bucket_ids_.back()) return;  // out of order: the owner restarts on reboots
  bucket_ids_.push_back(id);
  buckets_.push_back({index, residual});
  if (buckets_.size() > kMaxBuckets) compact();
}

void ClockModel::compact() {
  // Double the bucket width: merge neighbours, keeping the lower residual.
  bucket_samples_ *= 2;
  std::vector<Bucket> merged;
  std::vector<std::uint64_t> ids;
  for (std::size_t i = 0; i < buckets_.size(); ++i) {
    const std::uint64_t id = bucket_ids_[i] / 2;
    if (!ids.empty() && ids.back() == id) {
      if (buckets_[i].residual_s < merged.back().residual_s) merged.back() = buckets_[i];
    } else {
      ids.push_back(id);
      merged.push_back(buckets_[i]);
    }
  }
  buckets_ = std::move(merged);
  bucket_ids_ = std::move(ids);
}

ClockFit ClockModel::fit() const {
  ClockFit f;
  f.pairs = pairs_;
  f.buckets = buckets_.size();
  if (buckets_.size() < 2) return f;
  // Least squares residual = a + b * (index * period), centred for precision.
  double mx = 0, my = 0;
  for (const auto& b : buckets_) {
    mx += double(b.index) * period_s_;
    my += b.residual_s;
  }
  mx /= double(buckets_.size());
  my /= double(buckets_.size());
  double sxx = 0, sxy = 0;
  for (const auto& b : buckets_) {
    const double x = double(b.index) * period_s_ - mx;
    sxx += x * x;
    sxy += x * (b.residual_s - my);
  }
  if (!(sxx > 0)) return f;
  const double slope = sxy / sxx;
  f.valid = true;
  f.skew_ppm = slope * 1e6;
  f.offset_s = my - slope * mx;
  return f;
}

double ClockModel::utc_of(std::uint64_t index) const {
  const ClockFit f = fit();
  const double board_s = double(index) * period_s_;
  if (!f.valid) return t0_ + board_s + (buckets_.empty() ? 0.0 : buckets_.front().residual_s);
  return t0_ + f.offset_s + board_s * (1.0 + f.skew_ppm * 1e-6);
}

}  // namespace accrue::daemon
