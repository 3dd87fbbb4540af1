#pragma once
// EndWindows keeps the first and the last `window` samples of an open segment
// so that its start and end output can be estimated by a straight-line fit
// (less noisy than one reading, and it yields the local rate needed to
// estimate what a following dead time loses). Fixed memory per channel.
// The standard errors use the fit's residual rms, but never less than
// `noise_floor_v` (the ADC's quantisation LSB/sqrt(12)): a noise-free line
// still has quantisation error at its ends.
//
// A straight line is only right while the input is steady. When the input
// changes inside the window (a beam spill starting, a slow sample rate), the
// line's value at the end is biased, always towards less change, so the
// error would pile up over thousands of segments. So the window is tested
// first: if the line's residuals are too large for the noise (a chi-square
// test; the noise comes from the window's second differences, which a steady
// ramp does not touch and one change of input barely moves), the half farther
// from the end is dropped, and again, down to the last 2 samples (whose line
// is the end sample itself and the last step's rate). A change inside the
// very last interval cannot be told from a steady line by the fit; the three
// last steps can tell it, and the estimate says so (changed_at_end).
#include <cstddef>
#include <cstdint>
#include <vector>

#include "daemon/chain/linear_fit.hpp"

namespace accrue::chain {

struct EndEstimate {
  double value_v = 0.0;
  double value_se_v = 0.0;
  double rate_v_per_s = 0.0;
  double rate_se_v_per_s = 0.0;
  std::size_t points = 0;  // samples the line was fitted to (fewer than the window after a change of input)
  // The input changed within the sample interval next to the end (the step
  // there disagrees with the two steps beyond it, which agree): the rate is
  // then of a partial interval and says nothing of the level on the far side
  // of the end (a dead time's estimate should rely on the other side's rate).
  bool changed_at_end = false;
};

class EndWindows {
 public:
  explicit EndWindows(std::size_t window, double noise_floor_v = 0.0);
  void clear();
  void add(std::uint64_t index, double volts);
  bool empty() const { return count_ == 0; }
  std::uint64_t count() const { return count_; }
  std::uint64_t first_index() const { return first_index_; }
  std::uint64_t last_index() const { return last_index_; }
  // Fitted output and rate at the first / last sample; period converts index to seconds.
  EndEstimate start(double period_s) const;
  EndEstimate end(double period_s) const;

 private:
  struct Point {
    std::uint64_t index;
    double volts;
  };
  static constexpr double kLackOfFitSigmas = 3.0;
  static constexpr double kChangeSigmas = 4.0;
  EndEstimate fit_at(const std::vector<Point>& nearest_first, std::uint64_t at, double period_s) const;
  std::size_t window_;
  double noise_floor_v_;
  std::vector<Point> head_;
  std::vector<Point> tail_;  // ring buffer
  std::size_t tail_next_ = 0;
  std::uint64_t count_ = 0;
  std::uint64_t first_index_ = 0;
  std::uint64_t last_index_ = 0;
};

}  // namespace accrue::chain
