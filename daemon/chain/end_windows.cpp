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

namespace {

// Noise of single readings from the window's second differences: for white
// noise v_k - 2 v_(k+1) + v_(k+2) has variance 6 sigma^2, a steady ramp adds
// nothing to it, and a change of input adds to one of them only, which the
// median ignores (MAD/0.6745 is consistent for Gaussian noise).
double noise_from_second_differences(const std::vector<double>& y) {
  if (y.size() < 4) return 0.0;
  std::vector<double> d;
  d.reserve(y.size() - 2);
  for (std::size_t k = 0; k + 2 < y.size(); ++k) d.push_back(std::fabs(y[k] - 2.0 * y[k + 1] + y[k + 2]));
  std::nth_element(d.begin(), d.begin() + std::ptrdiff_t(d.size() / 2), d.end());
  return d[d.size() / 2] / 0.6745 / std::sqrt(6.0);
}

}  // namespace

EndEstimate EndWindows::fit_at(const std::vector<Point>& nearest_first, std::uint64_t at, double period_s) const {
  const std::size_t total = nearest_first.size();
  std::vector<double> y(total);
  for (std::size_t k = 0; k < total; ++k) y[k] = nearest_first[k].volts;
  const double sigma = std::max(noise_from_second_differences(y), noise_floor_v_);
  const auto fit_n = [&](std::size_t n) {
    LinearFit fit;
    for (std::size_t k = 0; k < n; ++k) fit.add((double(nearest_first[k].index) - double(at)) * period_s, y[k]);
    return fit;
  };
  std::size_t n = total;
  LinearFit fit = fit_n(n);
  while (n >= 4) {
    // Lack of fit: the line's residuals against the noise (chi-square with
    // n - 2 degrees of freedom, refused beyond its mean + 3 standard deviations).
    const LineEstimate line = fit.estimate();
    const double dof = double(n - 2);
    const double ssr = line.residual_rms * line.residual_rms * dof;
    if (ssr <= sigma * sigma * (dof + kLackOfFitSigmas * std::sqrt(2.0 * dof))) break;
    n /= 2;  // the input changed within the window: keep the half nearest the end
    fit = fit_n(n);
  }
  const LineEstimate line = fit.estimate();
  EndEstimate e;
  if (total >= 4) {
    // Steps nearest first; a difference of two steps has variance 6 sigma^2.
    const double s0 = y[0] - y[1], s1 = y[1] - y[2], s2 = y[2] - y[3];
    const double limit = kChangeSigmas * std::sqrt(6.0) * sigma;
    e.changed_at_end = std::fabs(s0 - s1) > limit && std::fabs(s0 - s2) > limit && std::fabs(s1 - s2) <= limit;
  }
  e.value_v = line.at(0.0);
  e.rate_v_per_s = line.slope;
  e.points = n;
  const double sxx = fit.sxx();
  const double s = std::max(line.residual_rms, sigma);
  if (n >= 2 && sxx > 0) {
    const double d = 0.0 - fit.x_mean();
    e.value_se_v = s * std::sqrt(1.0 / double(n) + d * d / sxx);
    e.rate_se_v_per_s = s / std::sqrt(sxx);
  } else {
    e.value_se_v = s;  // one point: no rate
    e.rate_se_v_per_s = 0.0;
  }
  return e;
}

EndEstimate EndWindows::start(double period_s) const {
  if (head_.empty()) return {};
  return fit_at(head_, first_index_, period_s);
}

EndEstimate EndWindows::end(double period_s) const {
  if (tail_.empty()) return {};
  // The ring buffer from the newest sample back.
  std::vector<Point> nearest_first;
  nearest_first.reserve(tail_.size());
  const std::size_t newest = tail_.size() < window_ ? tail_.size() - 1 : (tail_next_ + window_ - 1) % window_;
  for (std::size_t k = 0; k < tail_.size(); ++k) nearest_first.push_back(tail_[(newest + tail_.size() - k) % tail_.size()]);
  return fit_at(nearest_first, last_index_, period_s);
}

}  // namespace accrue::chain
