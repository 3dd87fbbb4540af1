#pragma once
// Ordinary least squares of y = a + b*x, accumulated one point at a time.
// x and y are taken relative to the first point so that long absolute times
// and large output levels keep full precision. Gives the slope, intercept and their standard errors
// (textbook formulas: s^2 = SSR/(n-2), se(b) = s/sqrt(Sxx)).
#include <cstddef>

namespace accrue::chain {

struct LineEstimate {
  double x0 = 0.0;         // origin of x used for the intercept
  double intercept = 0.0;  // y at x0
  double slope = 0.0;
  double intercept_se = 0.0;
  double slope_se = 0.0;
  double residual_rms = 0.0;
  std::size_t n = 0;
  double at(double x) const { return intercept + slope * (x - x0); }
  // Standard error of the fitted line's value at x.
  double se_at(double x, double x_mean, double sxx) const;
};

class LinearFit {
 public:
  void add(double x, double y);
  std::size_t size() const { return n_; }
  // Needs two distinct x; with fewer, slope and its error are 0 and the line is flat.
  LineEstimate estimate() const;
  double x_mean() const;
  double sxx() const;

 private:
  std::size_t n_ = 0;
  double origin_ = 0.0;
  double y_origin_ = 0.0;  // y is also taken relative to the first point
  double sx_ = 0, sy_ = 0, sxx_ = 0, sxy_ = 0, syy_ = 0;
};

}  // namespace accrue::chain
