#include "daemon/chain/end_windows.hpp"

#include <algorithm>
#include <cmath>

namespace accrue::chain {

EndWindows::EndWindows(std::size_t window, double noise_floor_v)
    : window_(window < 2 ? 2 : window), noise_floor_v_(noise_floor_v) {
  head_.reserve(window_);
  tail_.reserve(window_);
}

void EndWindows::clear() {
  head_.clear();
  tail_.clear();
  tail_next_ = 0;
  count_ = 0;
}

void EndWindows::add(std::uint64_t index, double volts) {
  if (count_ == 0) first_index_ = index;
  last_index_ = index;
  ++count_;
  if (head_.size() < window_) head_.push_back({index, volts});
  if (tail_.size() < window_) {
    tail_.push_back({index, volts});
  } else {
    tail_[tail_next_] = {index, volts};
    tail_next_ = (tail_next_ + 1) % window_;
  }
}

EndEstimate EndWindows::fit_at(const std::vector<Point>& points, std::size_t begin, std::size_t n, std::uint64_t at,
                               double period_s) const {
  LinearFit fit;
  for (std::size_t k = 0; k < n; ++k) {
    const Point& p = points[(begin + k) % points.size()];
    // Time relative to the evaluation point keeps the numbers small and exact.
    fit.add((double(p.index) - double(at)) * period_s, p.volts);
  }
  const LineEstimate line = fit.estimate();
  EndEstimate e;
  e.value_v = line.at(0.0);
  e.rate_v_per_s = line.slope;
  const double sxx = fit.sxx();
  const double s = std::max(line.residual_rms, noise_floor_v_);
  if (n >= 3 && sxx > 0) {
    const double d = 0.0 - fit.x_mean();
    e.value_se_v = s * std::sqrt(1.0 / double(n) + d * d / sxx);
    e.rate_se_v_per_s = s / std::sqrt(sxx);
  } else {
    e.value_se_v = s;  // one or two points: no residuals to learn the noise from
    e.rate_se_v_per_s = 0.0;
  }
  return e;
}

EndEstimate EndWindows::start(double period_s) const {
  if (head_.empty()) return {};
  return fit_at(head_, 0, head_.size(), first_index_, period_s);
}

EndEstimate EndWindows::end(double period_s) const {
  if (tail_.empty()) return {};
  const std::size_t begin = tail_.size() < window_ ? 0 : tail_next_;
  return fit_at(tail_, begin, tail_.size(), last_index_, period_s);
}

}  // namespace accrue::chain
