#include <catch2/catch.hpp>
#include <gsl/gsl_multifit.h>

#include <cmath>
#include <complex>
#include <numbers>
#include <vector>

#include "daemon/chain/calibration.hpp"
#include "unit/chain_feed.hpp"

// The R2 leak of a practical integrator, read by the chain with and without
// its leak correction. The check values come from the lossy integrator's
// transfer function H(jw) = -(R2/R1)/(1 + jw*R2*C) (the standard single-pole
// "practical integrator" of op-amp handbooks, e.g. Horowitz & Hill, The Art of
// Electronics, 3rd ed., §4.2.6; DESIGN.md §4) and its step response
// V(t) = -(R2/R1)*Vs*(1 - exp(-t/(R2*C))) (first-order system, same sources).
// The integrator output fed to the chain is the exact solution of
// dV/dt = -Vin/(R1*C) - V/(R2*C), evaluated in closed form, not simulated.

using namespace accrue;
using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;

namespace {

constexpr double r1 = 1e6, c = 1e-6, r2 = 10e6;  // R1*C = 1 s, tau = R2*C = 10 s; R2 = 10*R1 (common practice)
constexpr double tau = r2 * c;

chain::Calibration lossy_cal() {
  chain::Calibration cal;
  cal.sensor = chain::SensorKind::volt_seconds;  // the total is ∫Vin dt in V·s
  cal.front_end.r1_ohm = r1;
  cal.front_end.c_farad = c;
  cal.front_end.r2_ohm = r2;
  return cal;
}

chain::ChainSettings settings(bool leak_correction) {
  chain::ChainSettings s;
  s.sample_period_s = 0.01;
  s.settle_s = 0.0;
  s.series_interval_s = 1.0;
  s.leak_correction = leak_correction;
  return s;
}

struct Reading {
  std::vector<double> t;      // time of each series point's last sample
  std::vector<double> total;  // the running total there
};

Reading run(bool leak_correction, std::uint64_t samples, const std::function<double(double)>& vout) {
  test::ChainFeed f(lossy_cal(), settings(leak_correction));
  f.run(samples, 0, vout);
  f.chain.finish(f.out);
  Reading r;
  for (const auto& p : f.out.series) {
    r.t.push_back(double(p.first_index + p.samples - 1) * f.settings.sample_period_s);
    r.total.push_back(p.total);
  }
  const std::uint32_t flags = f.chain.snapshot().flags;
  CHECK(((flags & chain::segment_flag::leak_corrected) != 0) == leak_correction);
  return r;
}

// Least-squares fit y = a0 + a1*cos(w t) + a2*sin(w t) by GSL (gsl_multifit_linear);
// returns the phasor a1 - j*a2 (so that y = a0 + Re{P e^{jwt}}).
std::complex<double> phasor_of(const std::vector<double>& t, const std::vector<double>& y, double w, std::size_t from) {
  const std::size_t n = t.size() - from;
  gsl_matrix* x = gsl_matrix_alloc(n, 3);
  gsl_vector* yy = gsl_vector_alloc(n);
  gsl_vector* a = gsl_vector_alloc(3);
  gsl_matrix* cov = gsl_matrix_alloc(3, 3);
  gsl_multifit_linear_workspace* work = gsl_multifit_linear_alloc(n, 3);
  for (std::size_t i = 0; i < n; ++i) {
    gsl_matrix_set(x, i, 0, 1.0);
    gsl_matrix_set(x, i, 1, std::cos(w * t[from + i]));
    gsl_matrix_set(x, i, 2, std::sin(w * t[from + i]));
    gsl_vector_set(yy, i, y[from + i]);
  }
  double chisq = 0;
  REQUIRE(gsl_multifit_linear(x, yy, a, cov, &chisq, work) == 0);
  const std::complex<double> p(gsl_vector_get(a, 1), -gsl_vector_get(a, 2));
  gsl_multifit_linear_free(work);
  gsl_matrix_free(cov);
  gsl_vector_free(a);
  gsl_vector_free(yy);
  gsl_matrix_free(x);
  return p;
}

}  // namespace

TEST_CASE("leak_correction: a slow sine is under-read and phase-shifted as H(jw) predicts, and recovered with correction",
          "[chain][leak][reference]") {
  // Vin = A sin(w t) at w = 1/tau (the corner): the circuit already in its
  // steady state, V(t) = Re{H(jw) * (-jA) e^{jwt}} (sin = Re{-j e^{jwt}}).
  const double amp = 0.5, w = 1.0 / tau;
  const std::complex<double> j(0.0, 1.0);
  const std::complex<double> h = -(r2 / r1) / (1.0 + j * w * r2 * c);
  const std::complex<double> vin_phasor = -j * amp;
  const auto vout = [&](double t) { return std::real(h * vin_phasor * std::exp(j * w * t)); };
  const std::uint64_t samples = 63000;  // 630 s, ten periods of 62.8 s
  const double t0 = 0.0;                // first sample
  // The ideal integral from t0: ∫ A sin(w s) ds = A (cos(w t0) - cos(w t))/w (closed form).
  const auto ideal = [&](double t) { return amp * (std::cos(w * t0) - std::cos(w * t)) / w; };
  const std::complex<double> ideal_phasor = vin_phasor / (j * w);  // ∫ e^{jwt} = e^{jwt}/(jw)

  SECTION("without correction: reading/ideal = -R1*C*H(jw)*jw, |.| = 0.7071, phase +45 degrees") {
    const Reading r = run(false, samples, vout);
    // The chain's total is -R1*C*(V(t) - V(t0)); its sinusoidal part has the phasor -R1*C*H*Vin.
    const std::complex<double> measured = phasor_of(r.t, r.total, w, 0);
    const std::complex<double> predicted_ratio = -r1 * c * h * j * w;
    const std::complex<double> measured_ratio = measured / ideal_phasor;
    // |ratio| = w*tau/sqrt(1 + (w*tau)^2) = 1/sqrt(2) and arg = atan(1/(w*tau)) = 45 degrees at the corner.
    CHECK_THAT(std::abs(predicted_ratio), WithinRel(1.0 / std::sqrt(2.0), 1e-12));
    CHECK_THAT(std::arg(predicted_ratio), WithinRel(std::numbers::pi / 4, 1e-12));
    CHECK_THAT(std::abs(measured_ratio), WithinRel(std::abs(predicted_ratio), 1e-4));
    CHECK_THAT(std::arg(measured_ratio), WithinAbs(std::arg(predicted_ratio), 1e-4));
    // So the uncorrected total misses the ideal integral by a large margin somewhere in the run.
    double worst = 0.0;
    for (std::size_t i = 0; i < r.t.size(); ++i) worst = std::max(worst, std::fabs(r.total[i] - ideal(r.t[i])));
    CHECK(worst > 0.3 * amp / w);
  }
  SECTION("with correction: the total is the ideal integral at every series point") {
    const Reading r = run(true, samples, vout);
    REQUIRE(r.t.size() > 600);
    for (std::size_t i = 0; i < r.t.size(); ++i) {
      INFO("t = " << r.t[i]);
      // Trapezoid error of the leak integral and the end fits' curvature bias
      // are ~1e-5 of the amplitude A/w = 5 V·s here; 2e-4 of it is the bound.
      CHECK_THAT(r.total[i], WithinAbs(ideal(r.t[i]), 2e-4 * amp / w));
    }
    const std::complex<double> measured = phasor_of(r.t, r.total, w, 0);
    CHECK_THAT(std::abs(measured / ideal_phasor), WithinRel(1.0, 1e-4));
    CHECK_THAT(std::arg(measured / ideal_phasor), WithinAbs(0.0, 1e-4));
  }
}

TEST_CASE("leak_correction: a step is under-read by the single-pole step response, recovered with correction",
          "[chain][leak][reference]") {
  // Vin = Vs from ts on, V(t) = -(R2/R1)*Vs*(1 - exp(-(t - ts)/tau)) (first-order step response).
  const double vs = 0.2, ts = 5.0;
  const auto vout = [&](double t) { return t < ts ? 0.0 : -(r2 / r1) * vs * (1.0 - std::exp(-(t - ts) / tau)); };
  const std::uint64_t samples = 5001;  // 50 s: the last sample at ts + 4.5 tau
  const double t_end = 50.0;
  const double ideal = vs * (t_end - ts);  // ∫Vin dt
  // Uncorrected: -R1*C*dV = R2*C*Vs*(1 - exp(-4.5)) = 1.978 V·s against the ideal 9 V·s.
  const double predicted_uncorrected = tau * vs * (1.0 - std::exp(-(t_end - ts) / tau));
  const Reading off = run(false, samples, vout);
  const Reading on = run(true, samples, vout);
  REQUIRE(off.t.back() == Approx(t_end));
  CHECK_THAT(off.total.back(), WithinRel(predicted_uncorrected, 1e-4));
  CHECK_THAT(on.total.back(), WithinRel(ideal, 1e-4));
  std::size_t checked = 0;
  for (std::size_t i = 0; i < off.t.size(); ++i) {
    const double t = off.t[i];
    // Skip the points whose 16-sample end window straddles the step's corner.
    if (t > ts && t < ts + 0.2) continue;
    INFO("t = " << t);
    const double x = t < ts ? 0.0 : (t - ts) / tau;
    CHECK_THAT(off.total[i], WithinAbs(vs * tau * (1.0 - std::exp(-x)), 1e-4 * vs * tau));
    CHECK_THAT(on.total[i], WithinAbs(vs * tau * x, 1e-4 * vs * tau));
    // One time constant after the step the uncorrected reading is (1 - 1/e) = 63.2 % of the ideal.
    if (std::fabs(x - 1.0) < 0.01) CHECK_THAT(off.total[i] / on.total[i], WithinRel((1.0 - std::exp(-x)) / x, 1e-3));
    ++checked;
  }
  CHECK(checked > 40);
}
