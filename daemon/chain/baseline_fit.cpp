#include "daemon/chain/baseline_fit.hpp"

#include <algorithm>
#include <cmath>

namespace accrue::chain {
namespace {

// Solves the symmetric positive definite p x p system A x = b and returns A^-1
// (p <= 3), by Gauss-Jordan with partial pivoting. False if singular.
template <std::size_t P>
bool invert(std::array<std::array<double, P>, P> a, std::array<std::array<double, P>, P>& inv) {
  for (std::size_t i = 0; i < P; ++i)
    for (std::size_t j = 0; j < P; ++j) inv[i][j] = i == j ? 1.0 : 0.0;
  for (std::size_t col = 0; col < P; ++col) {
    std::size_t pivot = col;
    for (std::size_t r = col + 1; r < P; ++r)
      if (std::fabs(a[r][col]) > std::fabs(a[pivot][col])) pivot = r;
    if (!(std::fabs(a[pivot][col]) > 1e-300)) return false;
    std::swap(a[pivot], a[col]);
    std::swap(inv[pivot], inv[col]);
    const double d = a[col][col];
    for (std::size_t j = 0; j < P; ++j) {
      a[col][j] /= d;
      inv[col][j] /= d;
    }
    for (std::size_t r = 0; r < P; ++r) {
      if (r == col) continue;
      const double f = a[r][col];
      for (std::size_t j = 0; j < P; ++j) {
        a[r][j] -= f * a[col][j];
        inv[r][j] -= f * inv[col][j];
      }
    }
  }
  return true;
}

template <std::size_t P>
BaselineEstimate solve(const std::vector<double>& u, const std::vector<double>& y, double u_scale, double x_centre,
                       double y_ref, BaselineRobust robust) {
  const std::size_t n = u.size();
  BaselineEstimate e;
  e.n = n;
  std::vector<double> w(n, 1.0), r(n, 0.0);
  std::array<double, P> beta{};
  std::array<std::array<double, P>, P> inv{};
  const int iterations = robust == BaselineRobust::huber ? 50 : 1;
  double scale = 0.0;
  for (int it = 0; it < iterations; ++it) {
    std::array<std::array<double, P>, P> ata{};
    std::array<double, P> aty{};
    for (std::size_t i = 0; i < n; ++i) {
      double basis[3] = {1.0, u[i], u[i] * u[i]};
      for (std::size_t j = 0; j < P; ++j) {
        aty[j] += w[i] * basis[j] * y[i];
        for (std::size_t k = 0; k < P; ++k) ata[j][k] += w[i] * basis[j] * basis[k];
      }
    }
    if (!invert<P>(ata, inv)) return e;
    std::array<double, P> next{};
    for (std::size_t j = 0; j < P; ++j)
      for (std::size_t k = 0; k < P; ++k) next[j] += inv[j][k] * aty[k];
    double change = 0.0;
    for (std::size_t j = 0; j < P; ++j) change = std::max(change, std::fabs(next[j] - beta[j]));
    beta = next;
    for (std::size_t i = 0; i < n; ++i) {
      double fit = beta[0] + beta[1] * u[i];
      if constexpr (P == 3) fit += beta[2] * u[i] * u[i];
      r[i] = y[i] - fit;
    }
    if (robust != BaselineRobust::huber) break;
    // Scale from the median absolute residual (MAD/0.6745 is consistent for Gaussian noise).
    std::vector<double> a(n);
    for (std::size_t i = 0; i < n; ++i) a[i] = std::fabs(r[i]);
    std::nth_element(a.begin(), a.begin() + std::ptrdiff_t(n / 2), a.end());
    scale = a[n / 2] / 0.6745;
    if (!(scale > 0)) break;
    const double k = 1.345 * scale;
    for (std::size_t i = 0; i < n; ++i) w[i] = std::fabs(r[i]) <= k ? 1.0 : k / std::fabs(r[i]);
    if (it > 0 && change <= 1e-12 * (std::fabs(beta[0]) + scale)) break;
  }
  double s2 = 0.0;
  if (robust == BaselineRobust::huber && scale > 0) {
    // Huber's covariance for an M-estimate (P. J. Huber, Robust Statistics,
    // Wiley 1981, ch. 7; cited from memory, the form often called "H1"): with z = r/scale,
    // psi(z) = clamp(z, -k, k) and m the share of |z| <= k,
    //   cov = K^2 * scale^2 * [sum psi^2/(n - p)] / m^2 * (X'X)^-1,
    //   K = 1 + (p/n) * (1 - m)/m.
    // Using the weighted residuals' SSR instead would count every glitch at
    // k*|r| and overstate the error several-fold.
    const double k = 1.345;
    double psi2 = 0.0, inliers = 0.0;
    for (std::size_t i = 0; i < n; ++i) {
      const double z = r[i] / scale;
      const double psi = std::clamp(z, -k, k);
      psi2 += psi * psi;
      if (std::fabs(z) <= k) inliers += 1.0;
      if (w[i] < 1.0) ++e.downweighted;
    }
    const double m = inliers / double(n);
    const double dof = double(n) - double(P);
    if (m > 0 && dof > 0) {
      const double big_k = 1.0 + double(P) / double(n) * (1.0 - m) / m;
      s2 = big_k * big_k * scale * scale * (psi2 / dof) / (m * m);
    }
    std::array<std::array<double, P>, P> xtx{};
    for (std::size_t i = 0; i < n; ++i) {
      const double basis[3] = {1.0, u[i], u[i] * u[i]};
      for (std::size_t j = 0; j < P; ++j)
        for (std::size_t q = 0; q < P; ++q) xtx[j][q] += basis[j] * basis[q];
    }
    if (!invert<P>(xtx, inv)) return e;
    // The noise the fit saw: the robust scale (MAD/0.6745), which glitches barely move.
    e.residual_rms_v = scale;
  } else {
    // Textbook OLS: s^2 = SSR/(n - p).
    double ssr = 0.0;
    for (std::size_t i = 0; i < n; ++i) ssr += r[i] * r[i];
    const double dof = double(n) - double(P);
    s2 = dof > 0 ? ssr / dof : 0.0;
    e.residual_rms_v = std::sqrt(s2);
  }
  e.ok = true;
  e.t0_s = x_centre;
  e.a_v = y_ref + beta[0];
  e.b_v_per_s = beta[1] / u_scale;
  e.var_b = s2 * inv[1][1] / (u_scale * u_scale);
  if constexpr (P == 3) {
    e.c_v_per_s2 = beta[2] / (u_scale * u_scale);
    e.cov_bc = s2 * inv[1][2] / (u_scale * u_scale * u_scale);
    e.var_c = s2 * inv[2][2] / (u_scale * u_scale * u_scale * u_scale);
  }
  return e;
}

}  // namespace

BaselineFit::BaselineFit(std::size_t max_points) : max_points_(std::max<std::size_t>(max_points, 16)) {}

void BaselineFit::clear() {
  points_.clear();
  stride_ = 1;
  seen_ = 0;
}

void BaselineFit::add(double x_s, double y_v) {
  if (seen_ == 0) origin_ = x_s;
  if (seen_++ % stride_ != 0) return;
  points_.push_back({x_s - origin_, y_v});
  if (points_.size() >= max_points_) {
    // Thin to every second point and keep every 2*stride-th from now on.
    std::size_t j = 0;
    for (std::size_t i = 0; i < points_.size(); i += 2) points_[j++] = points_[i];
    points_.resize(j);
    stride_ *= 2;
  }
}

BaselineEstimate BaselineFit::fit(BaselineModel model, BaselineRobust robust) const {
  const std::size_t p = model == BaselineModel::quadratic ? 3 : 2;
  if (points_.size() < p + 1) return {};
  // Centre and scale x to [-1, 1] so the normal equations stay well conditioned.
  double lo = points_.front().x, hi = points_.front().x, ysum = 0.0;
  for (const Point& q : points_) {
    lo = std::min(lo, q.x);
    hi = std::max(hi, q.x);
    ysum += q.y;
  }
  if (!(hi > lo)) return {};
  const double centre = (lo + hi) / 2.0, half = (hi - lo) / 2.0;
  const double y_ref = ysum / double(points_.size());
  std::vector<double> u(points_.size()), y(points_.size());
  for (std::size_t i = 0; i < points_.size(); ++i) {
    u[i] = (points_[i].x - centre) / half;
    y[i] = points_[i].y - y_ref;
  }
  return p == 3 ? solve<3>(u, y, half, origin_ + centre, y_ref, robust)
                : solve<2>(u, y, half, origin_ + centre, y_ref, robust);
}

}  // namespace accrue::chain
