#include "daemon/chain/end_windows.hpp"

#include <cmath>

namespace accrue::chain {

EndWindows::EndWindows(std::size_t window) : window_(window < 2 ? 2 : window) {
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
                               double period_s) {
  LinearFit fit;
  for (std::size_t k = 0; k < n; ++k) {
    const Point& p = points[(begin + k) % points.size()];
    // Time relative to the evaluation point keeps the numbers small and exact.
    fit.add((double(p.index) - double(at)) * period_s, p.volts);
  }
  const LineEstimate line = fit.estimate();
  EndEstimate e;
  e.value_v = line.at(0.0);
  e.value_se_v = line.se_at(0.0, fit.x_mean(), fit.sxx());
  e.rate_v_per_s = line.slope;
  e.rate_se_v_per_s = line.slope_se;
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
