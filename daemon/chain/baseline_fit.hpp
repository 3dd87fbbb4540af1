#pragma once
// BaselineFit fits the drift of an integrator output on a zero window (input
// shorted, or an interval the user marked quiet): V(t) = a + b*(t - t0)
// [+ c*(t - t0)^2] by least squares, with the covariance of the parameters
// (textbook OLS: cov = s^2 (X'X)^-1, s^2 = SSR/(n - p)). The robust option is
// Huber's M-estimator by iteratively reweighted least squares (P. J. Huber,
// "Robust estimation of a location parameter", Ann. Math. Statist. 35, 1964;
// tuning constant 1.345 and scale MAD/0.6745, the usual choices), which
// leaves glitches (spikes, a relay bounce) nearly without weight; its
// covariance is Huber's asymptotic one (psi-clipped residuals), so glitches
// do not inflate the stated slope error.
//
// The caller adds points (x in seconds, y in volts) and asks for a fit. x is
// taken relative to the first point and scaled inside, so long absolute times
// keep full precision. Memory is bounded: beyond `max_points` the stored
// points are thinned to every second one (the fit then uses fewer, evenly
// spread points; the count is reported).
#include <array>
#include <cstddef>
#include <vector>

namespace accrue::chain {

enum class BaselineModel { linear, quadratic };
enum class BaselineRobust { none, huber };

struct BaselineEstimate {
  bool ok = false;       // false: too few points or degenerate times
  double t0_s = 0.0;     // origin of the polynomial
  double a_v = 0.0;      // value at t0
  double b_v_per_s = 0.0;
  double c_v_per_s2 = 0.0;  // 0 for the linear model
  // Covariance of (b, c); cov_cc = cov_bc = 0 for the linear model.
  double var_b = 0.0, cov_bc = 0.0, var_c = 0.0;
  double residual_rms_v = 0.0;  // s, the fit's residual standard deviation (robust: the scale MAD/0.6745)
  std::size_t n = 0;            // points used
  std::size_t downweighted = 0; // robust fit: points given weight < 1
  double slope_at(double t_s) const { return b_v_per_s + 2.0 * c_v_per_s2 * (t_s - t0_s); }
  double value_at(double t_s) const {
    const double d = t_s - t0_s;
    return a_v + b_v_per_s * d + c_v_per_s2 * d * d;
  }
};

class BaselineFit {
 public:
  explicit BaselineFit(std::size_t max_points = 65536);
  void clear();
  void add(double x_s, double y_v);
  std::size_t size() const { return points_.size(); }
  std::size_t seen() const { return seen_; }
  BaselineEstimate fit(BaselineModel model, BaselineRobust robust) const;

 private:
  struct Point {
    double x, y;
  };
  std::size_t max_points_;
  std::vector<Point> points_;
  std::size_t stride_ = 1;  // keep every stride-th point seen
  std::size_t seen_ = 0;
  double origin_ = 0.0;
};

}  // namespace accrue::chain
