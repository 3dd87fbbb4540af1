#include "daemon/chain/linear_fit.hpp"

#include <algorithm>
#include <cmath>

namespace accrue::chain {

double LineEstimate::se_at(double x, double x_mean, double sxx) const {
  if (n < 3 || sxx <= 0) return residual_rms;
  const double d = x - x_mean;
  return residual_rms * std::sqrt(1.0 / double(n) + d * d / sxx);
}

void LinearFit::add(double x, double y) {
  if (n_ == 0) {
    origin_ = x;
    y_origin_ = y;
  }
  const double u = x - origin_;
  y -= y_origin_;
  ++n_;
  sx_ += u;
  sy_ += y;
  sxx_ += u * u;
  sxy_ += u * y;
  syy_ += y * y;
}

double LinearFit::x_mean() const { return n_ ? origin_ + sx_ / double(n_) : origin_; }

double LinearFit::sxx() const { return n_ ? sxx_ - sx_ * sx_ / double(n_) : 0.0; }

LineEstimate LinearFit::estimate() const {
  LineEstimate e;
  e.n = n_;
  e.x0 = x_mean();
  if (n_ == 0) return e;
  const double n = double(n_);
  const double mean_y = sy_ / n;
  e.intercept = y_origin_ + mean_y;
  const double cxx = sxx();
  const double cyy = std::max(0.0, syy_ - sy_ * sy_ / n);
  if (n_ < 2 || cxx <= 0.0) {
    e.residual_rms = n_ > 1 ? std::sqrt(cyy / (n - 1)) : 0.0;
    e.intercept_se = n_ > 1 ? e.residual_rms / std::sqrt(n) : 0.0;
    return e;
  }
  const double cxy = sxy_ - sx_ * sy_ / n;
  e.slope = cxy / cxx;
  const double ssr = std::max(0.0, cyy - e.slope * cxy);
  e.residual_rms = n_ > 2 ? std::sqrt(ssr / (n - 2)) : 0.0;
  e.slope_se = e.residual_rms / std::sqrt(cxx);
  e.intercept_se = e.residual_rms / std::sqrt(n);
  return e;
}

}  // namespace accrue::chain
