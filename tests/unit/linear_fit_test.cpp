#include <catch2/catch.hpp>
#include <gsl/gsl_fit.h>

#include <cmath>
#include <random>
#include <vector>

#include "daemon/chain/linear_fit.hpp"

using namespace accrue::chain;
using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;

TEST_CASE("linear_fit: slope, intercept and standard errors agree with GSL", "[chain][fit]") {
  // Reference: GNU Scientific Library gsl_fit_linear (ordinary least squares,
  // returns the covariance matrix scaled by the residual variance).
  std::mt19937_64 rng(7);
  std::normal_distribution<double> noise(0.0, 50e-6);
  for (int trial = 0; trial < 20; ++trial) {
    const int n = 100 + 500 * trial;
    // Absolute times far from zero, as a long run's sample times are.
    const double t0 = 3600.0 * trial, dt = 1e-3, a = 0.01 * trial, b = 6e-3 - 1e-3 * trial;
    std::vector<double> x(n), y(n);
    LinearFit fit;
    for (int i = 0; i < n; ++i) {
      x[i] = t0 + i * dt;
      y[i] = a + b * (x[i] - t0) + noise(rng);
      fit.add(x[i], y[i]);
    }
    // GSL on centred x (its own numerics are best there); its intercept is at t0.
    std::vector<double> xc(n);
    for (int i = 0; i < n; ++i) xc[i] = x[i] - t0;
    double c0, c1, cov00, cov01, cov11, sumsq;
    REQUIRE(gsl_fit_linear(xc.data(), 1, y.data(), 1, std::size_t(n), &c0, &c1, &cov00, &cov01, &cov11, &sumsq) == 0);
    const LineEstimate e = fit.estimate();
    CHECK_THAT(e.slope, WithinRel(c1, 1e-9));
    CHECK_THAT(e.at(t0), WithinAbs(c0, 1e-12));
    CHECK_THAT(e.slope_se, WithinRel(std::sqrt(cov11), 1e-6));
    CHECK_THAT(e.residual_rms, WithinRel(std::sqrt(sumsq / (n - 2)), 1e-6));
  }
}

TEST_CASE("linear_fit: exact line, one point and two points", "[chain][fit]") {
  LinearFit fit;
  CHECK(fit.estimate().n == 0);
  fit.add(10.0, 5.0);
  CHECK(fit.estimate().slope == 0.0);
  CHECK(fit.estimate().intercept == 5.0);
  fit.add(12.0, 9.0);
  CHECK_THAT(fit.estimate().slope, WithinRel(2.0, 1e-15));
  for (int i = 3; i < 50; ++i) fit.add(10.0 + i, 5.0 + 2.0 * i);
  const auto e = fit.estimate();
  CHECK_THAT(e.slope, WithinRel(2.0, 1e-12));
  CHECK_THAT(e.slope_se, WithinAbs(0.0, 1e-9));
}
