#include <catch2/catch.hpp>
#include <gsl/gsl_multifit.h>

#include <cmath>
#include <random>
#include <vector>

#include "daemon/chain/baseline_fit.hpp"

// BaselineFit against the GNU Scientific Library on the same data:
// gsl_multifit_linear (ordinary least squares by SVD; cov = s^2 (X'X)^-1 with
// s^2 = chisq/(n - p)) for the quadratic model, and gsl_multifit_robust with
// gsl_multifit_robust_huber (Huber's M-estimator by IRLS, tuning constant
// 1.345) for the robust option.

using namespace accrue::chain;
using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;

namespace {

struct Data {
  std::vector<double> t, v;
};

// A drift window at a long absolute time (hours into a run), as the chain sees it.
Data drift_window(std::uint64_t seed, std::size_t n, double a, double b, double c2, double noise_v, double glitch_share,
                  double glitch_v) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> noise(0.0, noise_v);
  std::bernoulli_distribution glitch(glitch_share);
  Data d;
  const double t_start = 7200.0, dt = 0.01, tm = t_start + dt * double(n - 1) / 2;
  for (std::size_t i = 0; i < n; ++i) {
    const double t = t_start + dt * double(i), x = t - tm;
    d.t.push_back(t);
    d.v.push_back(a + b * x + c2 * x * x + noise(rng) + (glitch(rng) ? glitch_v : 0.0));
  }
  return d;
}

struct GslFit {
  double b = 0, c = 0, var_b = 0, var_c = 0, cov_bc = 0, sigma = 0;
};

// Fits v = p0 + p1*(t - t0) [+ p2*(t - t0)^2] with GSL, OLS or Huber.
GslFit gsl_fit(const Data& d, double t0, bool quadratic, bool huber) {
  const std::size_t n = d.t.size(), p = quadratic ? 3 : 2;
  gsl_matrix* x = gsl_matrix_alloc(n, p);
  gsl_vector* y = gsl_vector_alloc(n);
  gsl_vector* coef = gsl_vector_alloc(p);
  gsl_matrix* cov = gsl_matrix_alloc(p, p);
  for (std::size_t i = 0; i < n; ++i) {
    const double u = d.t[i] - t0;
    gsl_matrix_set(x, i, 0, 1.0);
    gsl_matrix_set(x, i, 1, u);
    if (quadratic) gsl_matrix_set(x, i, 2, u * u);
    gsl_vector_set(y, i, d.v[i]);
  }
  GslFit f;
  if (huber) {
    gsl_multifit_robust_workspace* w = gsl_multifit_robust_alloc(gsl_multifit_robust_huber, n, p);
    REQUIRE(gsl_multifit_robust(x, y, coef, cov, w) == 0);
    f.sigma = gsl_multifit_robust_statistics(w).sigma;
    gsl_multifit_robust_free(w);
  } else {
    gsl_multifit_linear_workspace* w = gsl_multifit_linear_alloc(n, p);
    double chisq = 0;
    REQUIRE(gsl_multifit_linear(x, y, coef, cov, &chisq, w) == 0);
    f.sigma = std::sqrt(chisq / double(n - p));
    gsl_multifit_linear_free(w);
  }
  f.b = gsl_vector_get(coef, 1);
  f.var_b = gsl_matrix_get(cov, 1, 1);
  if (quadratic) {
    f.c = gsl_vector_get(coef, 2);
    f.var_c = gsl_matrix_get(cov, 2, 2);
    f.cov_bc = gsl_matrix_get(cov, 1, 2);
  }
  gsl_matrix_free(cov);
  gsl_vector_free(coef);
  gsl_vector_free(y);
  gsl_matrix_free(x);
  return f;
}

BaselineEstimate ours(const Data& d, BaselineModel model, BaselineRobust robust) {
  BaselineFit fit;
  for (std::size_t i = 0; i < d.t.size(); ++i) fit.add(d.t[i], d.v[i]);
  return fit.fit(model, robust);
}

}  // namespace

TEST_CASE("baseline_fit: quadratic least squares agrees with GSL gsl_multifit_linear", "[chain][fit][reference]") {
  for (std::uint64_t seed = 1; seed <= 10; ++seed) {
    INFO("seed " << seed);
    const Data d = drift_window(seed, 500 + 300 * seed, 0.3, 4e-3, -2e-6 * double(seed), 80e-6, 0.0, 0.0);
    const BaselineEstimate e = ours(d, BaselineModel::quadratic, BaselineRobust::none);
    REQUIRE(e.ok);
    const GslFit g = gsl_fit(d, e.t0_s, true, false);
    CHECK_THAT(e.b_v_per_s, WithinRel(g.b, 1e-9));
    CHECK_THAT(e.c_v_per_s2, WithinRel(g.c, 1e-7));
    CHECK_THAT(e.var_b, WithinRel(g.var_b, 1e-7));
    CHECK_THAT(e.var_c, WithinRel(g.var_c, 1e-7));
    CHECK_THAT(e.cov_bc, WithinAbs(g.cov_bc, 1e-7 * std::sqrt(g.var_b * g.var_c)));
    CHECK_THAT(e.residual_rms_v, WithinRel(g.sigma, 1e-7));
    // And the estimate is honest about the truth it came from (4 standard errors).
    CHECK_THAT(e.c_v_per_s2, WithinAbs(-2e-6 * double(seed), 4.0 * std::sqrt(e.var_c)));
  }
}

TEST_CASE("baseline_fit: linear least squares agrees with GSL gsl_multifit_linear", "[chain][fit][reference]") {
  const Data d = drift_window(42, 3000, -1.2, 6e-3, 0.0, 50e-6, 0.0, 0.0);
  const BaselineEstimate e = ours(d, BaselineModel::linear, BaselineRobust::none);
  REQUIRE(e.ok);
  const GslFit g = gsl_fit(d, e.t0_s, false, false);
  CHECK_THAT(e.b_v_per_s, WithinRel(g.b, 1e-9));
  CHECK_THAT(e.var_b, WithinRel(g.var_b, 1e-7));
  CHECK_THAT(e.residual_rms_v, WithinRel(g.sigma, 1e-7));
}

TEST_CASE("baseline_fit: Huber fit ignores glitches and agrees with GSL's Huber robust fit", "[chain][fit][robust][reference]") {
  // 3 % of the samples carry +2 mV glitches (relay bounce, pickup) on 50 µV noise.
  for (const bool quadratic : {false, true}) {
    INFO((quadratic ? "quadratic" : "linear"));
    const double b_true = 2e-3, c_true = quadratic ? 5e-6 : 0.0;
    const Data d = drift_window(7, 4000, 0.05, b_true, c_true, 50e-6, 0.03, 2e-3);
    const BaselineModel model = quadratic ? BaselineModel::quadratic : BaselineModel::linear;
    const BaselineEstimate robust = ours(d, model, BaselineRobust::huber);
    const BaselineEstimate plain = ours(d, model, BaselineRobust::none);
    REQUIRE(robust.ok);
    REQUIRE(plain.ok);
    const GslFit g = gsl_fit(d, robust.t0_s, quadratic, true);
    const double se_b = std::sqrt(g.var_b);
    // GSL scales residuals by their leverage (r/sqrt(1 - h), h ~ p/n here) and
    // takes sigma from the MAD of the n - p largest residuals; ours uses plain
    // residuals and the MAD of all of them. With n = 4000 the two estimates
    // differ by far less than their standard error.
    CHECK_THAT(robust.b_v_per_s, WithinAbs(g.b, 0.1 * se_b));
    CHECK_THAT(std::sqrt(robust.var_b), WithinRel(se_b, 0.1));
    if (quadratic) CHECK_THAT(robust.c_v_per_s2, WithinAbs(g.c, 0.1 * std::sqrt(g.var_c)));
    // Both robust fits find the true drift; the glitches bias plain least squares.
    CHECK_THAT(robust.b_v_per_s, WithinAbs(b_true, 4.0 * se_b));
    CHECK(robust.downweighted > std::size_t(0.02 * 4000));
    if (quadratic) CHECK_THAT(robust.c_v_per_s2, WithinAbs(c_true, 4.0 * std::sqrt(robust.var_c)));
    // A glitch adds its offset to the intercept but not, on average, to the
    // slope; what it does inflate is the scatter: the plain fit's residual rms
    // is several times the noise, the robust one close to it.
    CHECK(plain.residual_rms_v > 4.0 * 50e-6);
    CHECK_THAT(robust.residual_rms_v, WithinRel(50e-6, 0.1));
    CHECK(std::sqrt(plain.var_b) > 3.0 * std::sqrt(robust.var_b));
  }
}
