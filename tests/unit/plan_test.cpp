#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>

#include "tools/accrue/plan.hpp"
#include "tools/accrue/plan_config.hpp"
#include "tools/accrue/plan_report.hpp"

using namespace accrue::client;
using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;

namespace {
constexpr double pi = std::numbers::pi;

bool has_warning(const Plan& p, const std::string& code) {
  return std::any_of(p.warnings.begin(), p.warnings.end(), [&](const PlanWarning& w) { return w.code == code; });
}

// The README's worked example (invented): a search coil on a magnet ramp.
PlanInput search_coil() {
  PlanInput in;
  in.sensor = accrue::chain::SensorKind::volt_seconds;
  in.parts = {100e3, 1e-6, 1e9, 0.5e-3, 20e-12};
  in.rail_v = 12;
  in.adc_bits = 16;
  in.full_scale_v = 10;
  in.reset_dead_s = 1e-3;
  in.pedestal_v = 2e-3;
  in.settle_s = 2e-3;
  in.noise_v = 100e-6;
  in.input_min = 5e-3;
  in.input_max = 50e-3;
  in.duration_s = 3600;
  return in;
}
}  // namespace

TEST_CASE("plan: the R2 >= 10*R1 rule of thumb raises its warning", "[plan]") {
  // Common practice: R2 at least ten times R1 keeps the DC gain high enough.
  PlanInput in = search_coil();
  in.parts.r2_ohm = 999e3;  // just under 10*R1
  CHECK(has_warning(make_plan(in), "r2_below_10_r1"));
  in.parts.r2_ohm = 1e6;  // exactly 10*R1: fine
  CHECK_FALSE(has_warning(make_plan(in), "r2_below_10_r1"));
  in.parts.r2_ohm = 0;  // no R2: no rule to break
  CHECK_FALSE(has_warning(make_plan(in), "r2_below_10_r1"));
  in.parts.r2_ohm = 50e3;  // below R1: no 0 dB crossing at all
  const Plan p = make_plan(in);
  CHECK(has_warning(p, "r2_below_10_r1"));
  CHECK(has_warning(p, "no_unity_crossing"));
  CHECK_FALSE(p.unity_gain_hz);
}

TEST_CASE("plan: the worked example's numbers (README)", "[plan]") {
  const Plan p = make_plan(search_coil());
  // Response: gain R2/R1 = 1e4 = 80 dB; fc = 1/(2 pi 1e9 1e-6) = 159.15 uHz;
  // 0 dB at sqrt(1e8 - 1)/(2 pi 1e3) = 1.59155 Hz; 1 % band from fc*sqrt(1e4 - 1).
  CHECK_THAT(p.dc_gain, WithinRel(1e4, 1e-12));
  CHECK_THAT(p.dc_gain_db, WithinAbs(80.0, 1e-9));
  CHECK_THAT(p.corner_hz, WithinAbs(159.155e-6, 1e-9));
  REQUIRE(p.unity_gain_hz);
  CHECK_THAT(*p.unity_gain_hz, WithinAbs(1.59155, 1e-5));
  CHECK_THAT(p.band_1pct_from_hz, WithinAbs(15.9147e-3, 1e-7));
  CHECK_THAT(p.band_01pct_from_hz, WithinAbs(159.155e-3, 1e-6));
  // Drift: 0.5 mV/(0.1 s) = 5 mV/s, 20 pA/1 uF = 20 uV/s; settles at 0.5 mV*10001 + 20 pA*1 GOhm = 5.0205 V.
  CHECK_THAT(p.drift_offset_v_per_s, WithinRel(5e-3, 1e-12));
  CHECK_THAT(p.drift_bias_v_per_s, WithinRel(20e-6, 1e-12));
  CHECK_THAT(p.drift_settles_at_v, WithinRel(5.0205, 1e-12));
  // It settles below the 9.8 V clip level (0.98 * 10 V): drift alone never saturates.
  CHECK_THAT(p.saturation_v, WithinRel(9.8, 1e-12));
  CHECK_FALSE(p.t_sat_drift_s);
  // Maximum input: 50 mV/(R1 C) = 0.5 V/s plus drift, from 2.5 mV (offset + pedestal):
  // t = tau ln((v_inf - v0)/(v_inf - v1)), tau = 1000 s, v_inf = 0.50502 V/s * 1000 s.
  const double tau = 1000, vinf = 0.50502 * tau;
  CHECK_THAT(p.rate_max_v_per_s, WithinRel(0.50502, 1e-12));
  REQUIRE(p.t_sat_max_s);
  CHECK_THAT(*p.t_sat_max_s, WithinRel(tau * std::log((vinf - 2.5e-3) / (vinf - 9.8)), 1e-12));
  CHECK_THAT(*p.t_sat_max_s, WithinAbs(19.59, 0.01));
  // Threshold: 20 % of the 9.7975 V headroom kept free: 2.5 mV + 0.8 * 9.7975 V = 7.8405 V.
  CHECK_THAT(p.threshold_v, WithinRel(7.8405, 1e-12));
  REQUIRE(p.interval_s);
  CHECK_THAT(*p.interval_s, WithinAbs(15.642, 0.001));
  REQUIRE(p.interval_min_input_s);
  CHECK_THAT(*p.interval_min_input_s, WithinRel(tau * std::log((55.02 - 2.5e-3) / (55.02 - 7.8405)), 1e-9));
  // Dead time 1 ms + 2 ms per reset: 3 ms in every 15.645 s at maximum input.
  CHECK_THAT(p.dead_fraction_max, WithinRel(3e-3 / (*p.interval_s + 3e-3), 1e-12));
  CHECK_THAT(p.dead_fraction_max, WithinAbs(1.9176e-4, 1e-8));
  CHECK_THAT(p.resets_max, WithinAbs(230.106, 0.01));
  // Floors: 16-bit bipolar LSB 10 V/32768 = 305.18 uV, LSB/sqrt(12) = 88.1 uV;
  // per reading hypot(100 uV, 88.1 uV) = 133.3 uV; segment sqrt(2)*sigma*sqrt(1/16 + 45/272).
  CHECK_THAT(p.lsb_v, WithinRel(10.0 / 32768, 1e-12));
  CHECK_THAT(p.quantisation_sigma_v, WithinAbs(88.10e-6, 0.01e-6));
  CHECK_THAT(p.reading_sigma_v, WithinAbs(133.27e-6, 0.01e-6));
  CHECK_THAT(p.segment_sigma_v, WithinRel(std::sqrt(2.0) * p.reading_sigma_v * std::sqrt(1.0 / 16 + 45.0 / 272), 1e-12));
  CHECK_THAT(p.segment_sigma_quantity, WithinRel(p.segment_sigma_v * 0.1, 1e-12));  // R1*C = 0.1 s
  // Warnings: the slowest ramp holds for ~ 150 s, below the 15.9 mHz 1 % band edge.
  CHECK(has_warning(p, "band_misses_signal"));
  CHECK_THAT(p.signal_low_hz, WithinRel(1 / (2 * pi * *p.interval_min_input_s), 1e-12));
  CHECK_FALSE(has_warning(p, "r2_below_10_r1"));
  CHECK_FALSE(has_warning(p, "drift_saturates_between_resets"));
}

TEST_CASE("plan: a reset interval longer than drift allows warns", "[plan]") {
  // No R2: drift 6 mV/s from 6 mV reaches 9.8 V in (9.8 - 0.006)/0.006 s.
  PlanInput in;
  in.parts = {1e9, 1e-9, 0, 1e-3, 5e-12};
  in.pedestal_v = 5e-3;
  in.input_min = 0;
  in.input_max = 130e-12;
  Plan p = make_plan(in);
  REQUIRE(p.t_sat_drift_s);
  CHECK_THAT(*p.t_sat_drift_s, WithinRel((9.8 - 6e-3) / 6e-3, 1e-12));
  CHECK_FALSE(has_warning(p, "drift_saturates_between_resets"));
  in.interval_s = *p.t_sat_drift_s + 1;
  CHECK(has_warning(make_plan(in), "drift_saturates_between_resets"));
  in.interval_s = *p.t_sat_max_s + 1;  // shorter than drift alone needs, longer than the maximum input allows
  CHECK(has_warning(make_plan(in), "input_saturates_between_resets"));
  in.interval_s = *p.t_sat_max_s - 1;
  CHECK(make_plan(in).warnings.empty());
}

TEST_CASE("plan: pulses leave room for one more pulse below the threshold", "[plan]") {
  PlanInput in;
  in.parts = {1e9, 1e-9, 0, 0, 0};
  in.pulsed = true;
  in.pulse_quantity = 1e-9;  // 1 nC into 1 nF: a 1 V step
  in.pulse_width_s = 1e-6;
  in.pulse_rate_hz = 0.1;
  const Plan p = make_plan(in);
  CHECK_THAT(p.pulse_step_v, WithinRel(1.0, 1e-12));
  CHECK_THAT(p.threshold_v, WithinRel(0.8 * 9.8 - 1.0, 1e-12));
  CHECK_THAT(p.dead_error_per_reset, WithinRel(1e-9, 1e-12));
  in.pulse_quantity = 10e-9;  // a 10 V step: more than the headroom
  CHECK(has_warning(make_plan(in), "pulse_exceeds_headroom"));
}

TEST_CASE("plan: bad input is named", "[plan]") {
  PlanInput in;
  in.parts = {0, -1, 0, 0, 0};
  in.input_max = 0;
  const auto errors = check_plan_input(in);
  auto mentions = [&](const std::string& s) {
    return std::any_of(errors.begin(), errors.end(), [&](const std::string& e) { return e.find(s) != std::string::npos; });
  };
  CHECK(mentions("--r1"));
  CHECK(mentions("--c"));
  CHECK(mentions("--input"));
  CHECK(check_plan_input(search_coil()).empty());
}

TEST_CASE("plan: the emitted config carries the calibration", "[plan]") {
  const PlanInput in = search_coil();
  const std::string text = emit_config(in, make_plan(in), EmitSettings{});
  CHECK(text.find("\"sensor\": \"volt_seconds\"") != std::string::npos);
  CHECK(text.find("\"r2_ohm\": 1000000000.0") != std::string::npos);
  CHECK(text.find("\"settle_s\": 0.002") != std::string::npos);
  CHECK(text.find("threshold 7.84") != std::string::npos);
  // 7.8405 V of a 10 V full scale; the interval is the time to it at the maximum input.
  CHECK(text.find("\"threshold_fraction\": 0.78405") != std::string::npos);
  CHECK(text.find("\"interval_s\": 15.64") != std::string::npos);
}

TEST_CASE("plan: SI text picks the prefix", "[plan]") {
  CHECK(si_text(4.7e-9, "F") == "4.7 nF");
  CHECK(si_text(159.155e-6, "Hz") == "159.2 µHz");
  CHECK(si_text(1e9, "ohm") == "1 Gohm");
  CHECK(si_text(0.5, "V") == "500 mV");
}
