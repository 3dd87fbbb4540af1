#include <catch2/catch.hpp>

#include <boost/math/quadrature/gauss.hpp>
#include <boost/math/quadrature/gauss_kronrod.hpp>
#include <cmath>
#include <numbers>

#include "daemon/chain/calibration.hpp"
#include "unit/chain_feed.hpp"

using namespace accrue;
using chain::SensorKind;
using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;
namespace bq = boost::math::quadrature;

namespace {

chain::ChainSettings fast_settings(double dt) {
  chain::ChainSettings s;
  s.sample_period_s = dt;
  s.settle_s = 0.0;
  s.series_interval_s = 1.0;
  return s;
}

chain::Calibration volt_seconds_cal() {
  chain::Calibration cal;
  cal.sensor = SensorKind::volt_seconds;
  cal.front_end.r1_ohm = 1e6;
  cal.front_end.c_farad = 1e-6;  // R1*C = 1 s
  return cal;
}

// Runs an ideal inverting integrator fed by vin (closed-form output `vout`)
// through the chain and returns (chain total, first time, last time).
struct Reading {
  double total, t_first, t_last;
};
Reading integrate(const chain::Calibration& cal, double dt, std::uint64_t n, const std::function<double(double)>& vout) {
  test::ChainFeed f(cal, fast_settings(dt));
  f.run(n, 0, vout);
  f.chain.finish(f.out);
  return {f.chain.snapshot().total, 0.0, double(n - 1) * dt};
}

}  // namespace

TEST_CASE("sensor_models: integrals of analytic inputs match closed forms and Boost.Math quadrature",
          "[chain][reference]") {
  // Volt-seconds channel, ideal integrator: Vout(t) = -(1/(R1*C)) * ∫0^t Vin.
  // References: the closed-form antiderivatives (handbook integrals) and
  // Boost.Math's Gauss-Kronrod quadrature of Vin itself (boost/math/quadrature).
  const chain::Calibration cal = volt_seconds_cal();
  const double rc = cal.front_end.r1_ohm * cal.front_end.c_farad;
  const double dt = 1e-4;
  const std::uint64_t n = 30001;  // 3 s
  struct Case {
    const char* name;
    std::function<double(double)> vin;
    std::function<double(double)> integral;  // ∫0^t vin, closed form
  };
  const double w = 2 * std::numbers::pi * 0.5, tau = 0.4, ts = 1.2345;
  const Case cases[] = {
      {"sine", [=](double t) { return 0.3 * std::sin(w * t); }, [=](double t) { return 0.3 * (1 - std::cos(w * t)) / w; }},
      {"exponential pulse", [=](double t) { return 0.8 * std::exp(-t / tau); },
       [=](double t) { return 0.8 * tau * (1 - std::exp(-t / tau)); }},
      {"step", [=](double t) { return t >= ts ? 0.5 : 0.0; }, [=](double t) { return t >= ts ? 0.5 * (t - ts) : 0.0; }},
  };
  for (const Case& c : cases) {
    INFO(c.name);
    const Reading r = integrate(cal, dt, n, [&](double t) { return -c.integral(t) / rc; });
    const double closed = c.integral(r.t_last) - c.integral(r.t_first);
    // Split the step's quadrature at the discontinuity (quadrature assumes smoothness).
    double quad = 0.0;
    if (std::string(c.name) == "step")
      quad = bq::gauss_kronrod<double, 31>::integrate(c.vin, r.t_first, ts, 5, 1e-12) +
             bq::gauss_kronrod<double, 31>::integrate(c.vin, ts, r.t_last, 5, 1e-12);
    else
      quad = bq::gauss_kronrod<double, 31>::integrate(c.vin, r.t_first, r.t_last, 5, 1e-12);
    CHECK_THAT(quad, WithinRel(closed, 1e-10));
    // 24-bit quantisation (1.2 µV) on outputs of ~0.1-1 V: 1e-5 relative is ample.
    CHECK_THAT(r.total, WithinRel(closed, 1e-5));
    CHECK_THAT(r.total, WithinRel(quad, 1e-5));
  }
}

TEST_CASE("sensor_models: search coil obeys Faraday's law (flux and flux density)", "[chain][reference]") {
  // Faraday's law of induction: emf = -N dPhi/dt, Phi = B*A (any electromagnetism
  // text, e.g. Griffiths, Introduction to Electrodynamics, §7.1). The integrator
  // output is computed from the emf by Boost.Math Gauss quadrature, not from B,
  // so the check runs through the law itself.
  chain::Calibration cal;
  cal.sensor = SensorKind::flux_density;
  cal.front_end.r1_ohm = 10e3;
  cal.front_end.c_farad = 1e-6;
  cal.sensor_model.turns = 200;
  cal.sensor_model.area_m2 = 1e-3;
  const double rc = cal.front_end.r1_ohm * cal.front_end.c_farad;
  const double b0 = 0.5, tau = 0.3;  // a magnet ramping to 0.5 T
  const auto b = [=](double t) { return b0 * (1 - std::exp(-t / tau)); };
  const auto emf = [=](double t) { return -cal.sensor_model.turns * cal.sensor_model.area_m2 * b0 / tau * std::exp(-t / tau); };
  // Short samples: the segment-end line fits (16 samples) are biased by the
  // curvature of the output, ~V''*w^2/12 for a window w; 1.6 ms keeps it < 1e-5.
  const double dt = 1e-4;
  const std::uint64_t n = 20001;
  const auto vout = [&](double t) { return -bq::gauss<double, 20>::integrate(emf, 0.0, t) / rc; };
  const Reading r = integrate(cal, dt, n, vout);
  const double true_db = b(r.t_last) - b(r.t_first);
  CHECK_THAT(r.total, WithinRel(true_db, 1e-5));
  CHECK(cal.unit() == "T");
  // The same run read as flux through one turn: dPhi = A*dB.
  cal.sensor = SensorKind::magnetic_flux;
  const Reading phi = integrate(cal, dt, n, vout);
  CHECK_THAT(phi.total, WithinRel(cal.sensor_model.area_m2 * true_db, 1e-5));
  CHECK(cal.unit() == "Wb");
}

TEST_CASE("sensor_models: Rogowski coil, velocity sensor and piezo forward models round-trip", "[chain][calibration]") {
  const double dt = 1e-4;  // end-fit curvature bias below 1e-5 (see the Faraday case)
  const std::uint64_t n = 10001;
  chain::Calibration cal;
  cal.front_end.r1_ohm = 100e3;
  cal.front_end.c_farad = 100e-9;
  const double rc = cal.front_end.r1_ohm * cal.front_end.c_farad;
  SECTION("Rogowski: emf = -M di/dt, so Vout = M*i/(R1*C) and di is read in A") {
    cal.sensor = SensorKind::rogowski_current;
    cal.sensor_model.mutual_inductance_h = 2e-7;
    const auto i = [](double t) { return 500.0 * std::sin(2 * std::numbers::pi * 0.7 * t); };
    const Reading r = integrate(cal, dt, n, [&](double t) { return cal.sensor_model.mutual_inductance_h * i(t) / rc; });
    CHECK_THAT(r.total, WithinRel(i(r.t_last) - i(r.t_first), 1e-5));
    CHECK(cal.unit() == "A");
  }
  SECTION("velocity sensor: Vin = G*v, so Vout = -G*x/(R1*C) and dx is read in m") {
    cal.sensor = SensorKind::displacement;
    cal.sensor_model.sensitivity_v_per_m_per_s = 20.0;  // 20 V/(m/s), an invented geophone-like value
    const auto x = [](double t) { return 2e-3 * (1 - std::cos(3.0 * t)); };
    const Reading r = integrate(cal, dt, n, [&](double t) { return -20.0 * x(t) / rc; });
    CHECK_THAT(r.total, WithinRel(x(r.t_last) - x(r.t_first), 1e-5));
    CHECK(cal.unit() == "m");
  }
  SECTION("piezo: Q = S*F into a charge amplifier, Vout = -Q/C, F read in N") {
    cal.sensor = SensorKind::piezo_force;
    cal.sensor_model.charge_sensitivity = 4e-12;  // 4 pC/N
    const auto f = [](double t) { return 1500.0 * t; };  // a 1.5 kN/s load ramp
    const Reading r = integrate(cal, dt, n, [&](double t) { return -4e-12 * f(t) / cal.front_end.c_farad; });
    CHECK_THAT(r.total, WithinRel(f(r.t_last) - f(r.t_first), 1e-5));
    CHECK(cal.unit() == "N");
    cal.sensor = SensorKind::piezo_acceleration;
    CHECK(cal.unit() == "m/s²");
  }
  CHECK(cal.check().empty());
}

TEST_CASE("sensor_models: charge as a count of elementary charges uses the exact SI value", "[chain][reference]") {
  // e = 1.602176634e-19 C exactly, fixed by the 2019 SI redefinition
  // (BIPM SI Brochure, 9th edition, 2019; CODATA 2018 lists it as exact).
  CHECK(chain::elementary_charge_c == 1.602176634e-19);
  // 1 pC = 1e-12 / 1.602176634e-19 = 6 241 509.074 460 76... elementary charges
  // (quotient checked with Python: 1e-12/1.602176634e-19).
  CHECK_THAT(chain::elementary_charges(1e-12), WithinRel(6241509.07446076, 1e-13));
  // A charge amplifier of 1 pF reading -1 V shows +1 pC.
  chain::Calibration cal;
  cal.front_end.c_farad = 1e-12;
  const Reading r = integrate(cal, 1e-3, 1001, [](double t) { return -t; });
  CHECK_THAT(chain::elementary_charges(r.total), WithinRel(6241509.07446076, 1e-5));
}

TEST_CASE("sensor_models: a calibration missing its sensor parameter says which", "[chain][calibration]") {
  chain::Calibration cal;
  cal.front_end.r1_ohm = 1e3;
  cal.sensor = SensorKind::flux_density;
  cal.sensor_model.area_m2 = 0;
  CHECK(cal.check().find("area_m2") != std::string::npos);
  cal.sensor = SensorKind::rogowski_current;
  CHECK(cal.check().find("mutual_inductance_h") != std::string::npos);
  cal.sensor = SensorKind::piezo_force;
  CHECK(cal.check().find("charge_sensitivity") != std::string::npos);
  cal.sensor = SensorKind::volt_seconds;
  cal.front_end.r1_ohm = 0;
  CHECK(cal.check().find("r1_ohm") != std::string::npos);
  chain::SensorKind k;
  CHECK(chain::parse_sensor_kind("rogowski_current", k));
  CHECK(k == SensorKind::rogowski_current);
  CHECK_FALSE(chain::parse_sensor_kind("coulombs", k));
}
