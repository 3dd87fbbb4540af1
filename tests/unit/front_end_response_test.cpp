#include <catch2/catch.hpp>

#include <cmath>
#include <numbers>

#include "daemon/chain/front_end_response.hpp"

using namespace accrue::chain;
using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;

namespace {
constexpr double pi = std::numbers::pi;
// R1 = 100 kOhm, C = 1 uF, R2 = 22 MOhm (invented values).
FrontEndResponse example() { return FrontEndResponse({100e3, 1e-6, 22e6, 0.5e-3, 20e-12}); }
}  // namespace

TEST_CASE("front_end_response: DC gain is R2/R1, 20*log10(R2/R1) dB", "[chain][front_end]") {
  // Fact of the trade (DEVELOPERS.md): the low-frequency gain of the lossy integrator is R2/R1.
  const auto r = example();
  CHECK_THAT(r.dc_gain(), WithinRel(220.0, 1e-12));
  CHECK_THAT(r.dc_gain_db(), WithinRel(20.0 * std::log10(220.0), 1e-12));
  CHECK_THAT(r.dc_gain_db(), WithinAbs(46.8485, 1e-4));  // 20*log10(220), by hand
  // Far below the corner the response is that gain, inverted (phase 180 deg).
  CHECK_THAT(std::abs(r.practical(1e-7)), WithinRel(220.0, 1e-6));
  CHECK_THAT(std::fabs(FrontEndResponse::phase_deg(r.practical(1e-7))), WithinAbs(180.0, 1e-3));
}

TEST_CASE("front_end_response: corner is 1/(2*pi*R2*C), 3 dB down and -135 deg there", "[chain][front_end]") {
  const auto r = example();
  const double fc = 1.0 / (2 * pi * 22e6 * 1e-6);  // handbook single-pole corner
  CHECK_THAT(r.corner_hz(), WithinRel(fc, 1e-12));
  CHECK_THAT(r.corner_hz(), WithinAbs(7.2343e-3, 1e-7));
  // |H(fc)| = DC gain / sqrt(2) (single pole: -3.01 dB at the corner).
  CHECK_THAT(FrontEndResponse::magnitude_db(r.practical(fc)), WithinAbs(r.dc_gain_db() - 10 * std::log10(2.0), 1e-9));
  // Inverting (-180 deg) plus the pole's -45 deg.
  const double ph = FrontEndResponse::phase_deg(r.practical(fc));
  CHECK_THAT(std::fabs(ph), WithinAbs(135.0, 1e-9));
}

TEST_CASE("front_end_response: 0 dB crossing near 1/(2*pi*R1*C), exactly where |H| = 1", "[chain][front_end]") {
  const auto r = example();
  const double approx = 1.0 / (2 * pi * 100e3 * 1e-6);
  CHECK_THAT(r.unity_gain_approx_hz(), WithinRel(approx, 1e-12));
  REQUIRE(r.unity_gain_hz());
  const double exact = *r.unity_gain_hz();
  // Solving |H| = 1: f = sqrt((R2/R1)^2 - 1)/(2*pi*R2*C).
  CHECK_THAT(exact, WithinRel(std::sqrt(220.0 * 220.0 - 1) / (2 * pi * 22e6 * 1e-6), 1e-12));
  CHECK_THAT(std::abs(r.practical(exact)), WithinAbs(1.0, 1e-12));
  // Near the approximation: relative difference 1 - sqrt(1 - 1/g^2) ~ 1/(2 g^2).
  CHECK_THAT(exact / approx, WithinRel(1.0 - 1.0 / (2 * 220.0 * 220.0), 1e-8));
  // The ideal integrator crosses exactly at 1/(2*pi*R1*C).
  CHECK_THAT(std::abs(r.ideal(approx)), WithinAbs(1.0, 1e-12));
  // R2 <= R1: the gain never reaches 1.
  CHECK_FALSE(FrontEndResponse({100e3, 1e-6, 100e3, 0, 0}).unity_gain_hz());
  CHECK_FALSE(FrontEndResponse({100e3, 1e-6, 50e3, 0, 0}).unity_gain_hz());
}

TEST_CASE("front_end_response: -20 dB per decade above the corner", "[chain][front_end]") {
  // Fact of the trade: a single pole falls 20 dB per decade well above its corner.
  const auto r = example();
  const double fc = r.corner_hz();
  for (double f : {100 * fc, 1e3 * fc, 1e4 * fc}) {
    const double slope = FrontEndResponse::magnitude_db(r.practical(10 * f)) - FrontEndResponse::magnitude_db(r.practical(f));
    CHECK_THAT(slope, WithinAbs(-20.0, 5e-3));
  }
  // Right at the corner the slope over a decade is much shallower.
  CHECK(FrontEndResponse::magnitude_db(r.practical(fc)) - FrontEndResponse::magnitude_db(r.practical(fc / 10)) > -4.0);
  // The ideal integrator is -20 dB/decade everywhere.
  CHECK_THAT(FrontEndResponse::magnitude_db(r.ideal(1e-3)) - FrontEndResponse::magnitude_db(r.ideal(1e-4)),
             WithinAbs(-20.0, 1e-9));
}

TEST_CASE("front_end_response: integrating band within 1 % and 0.1 % of ideal", "[chain][front_end]") {
  const auto r = example();
  for (double tol : {0.01, 0.001}) {
    const double f = r.integrating_from_hz(tol);
    CHECK_THAT(f, WithinRel(r.corner_hz() * std::sqrt(1 / (tol * tol) - 1), 1e-12));
    // At the band edge the vector error against the ideal response is the tolerance.
    CHECK_THAT(std::abs(r.practical(f) / r.ideal(f) - 1.0), WithinRel(tol, 1e-9));
    CHECK(std::abs(r.practical(2 * f) / r.ideal(2 * f) - 1.0) < tol);
    CHECK(std::abs(r.practical(f / 2) / r.ideal(f / 2) - 1.0) > tol);
  }
  CHECK(FrontEndResponse({100e3, 1e-6, 0, 0, 0}).integrating_from_hz(0.01) == 0.0);
}

TEST_CASE("front_end_response: droop of a held constant against direct integration", "[chain][front_end]") {
  // Check: V(T) = g*Vin*(1 - exp(-T/tau)) for the RC leak (step response of a single pole);
  // the ideal is Vin*T/(R1*C). Small T: droop ~ T/(2 tau).
  const auto r = example();
  const double tau = 22.0;
  for (double T : {0.01, 1.0, 10.0, 100.0}) {
    const double practical = 220.0 * (1 - std::exp(-T / tau)), ideal = T / 0.1;
    CHECK_THAT(r.droop_of_constant(T), WithinAbs(1 - practical / ideal, 1e-12));
  }
  CHECK_THAT(r.droop_of_constant(1e-3), WithinRel(1e-3 / (2 * tau), 1e-4));
}

TEST_CASE("front_end_response: drift from offset and bias, and time to saturation", "[chain][front_end]") {
  // DESIGN §4: input at zero the output ramps at Vos/(R1*C) + Ib/C; with R2 it
  // settles toward Vos*(1 + R2/R1) + Ib*R2; time to saturation (Vrail - |V0|)/|dV/dt|.
  const FrontEndResponse no_r2({1e9, 1e-9, 0, 1e-3, 5e-12});
  CHECK_THAT(no_r2.drift_from_offset_v_per_s(), WithinRel(1e-3, 1e-12));
  CHECK_THAT(no_r2.drift_from_bias_v_per_s(), WithinRel(5e-3, 1e-12));
  CHECK_THAT(no_r2.drift_v_per_s(), WithinRel(6e-3, 1e-12));
  REQUIRE(no_r2.time_to_reach_s(6e-3, 5e-3, 12.0));
  CHECK_THAT(*no_r2.time_to_reach_s(6e-3, 5e-3, 12.0), WithinRel((12.0 - 5e-3) / 6e-3, 1e-12));
  CHECK(*no_r2.time_to_reach_s(1.0, 13.0, 12.0) == 0.0);
  CHECK_FALSE(no_r2.time_to_reach_s(0.0, 0.0, 12.0));

  const auto r = example();
  CHECK_THAT(r.drift_settles_at_v(), WithinRel(0.5e-3 * 221 + 20e-12 * 22e6, 1e-12));
  // That settling level is below a 12 V rail: drift alone never saturates.
  CHECK_FALSE(r.time_to_reach_s(r.drift_v_per_s(), 0.0, 12.0));
  // Driven at 1 V/s (v_inf = 22 V): closed form against a fine Euler integration
  // of dV/dt = a - V/tau.
  const auto t = r.time_to_reach_s(1.0, 0.0, 10.0);
  REQUIRE(t);
  double v = 0, time = 0;
  const double dt = 1e-4;
  while (v < 10.0) {
    v += dt * (1.0 - v / 22.0);
    time += dt;
  }
  CHECK_THAT(*t, WithinAbs(time, 2e-4));
  CHECK_THAT(*t, WithinRel(22.0 * std::log(22.0 / 12.0), 1e-12));
}
