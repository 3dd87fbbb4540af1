#include "tools/accrue/plan.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <numbers>

namespace accrue::client {
namespace {

std::string fmt(const char* format, double a, double b = 0, double c = 0) {
  char buf[256];
  std::snprintf(buf, sizeof buf, format, a, b, c);
  return buf;
}

}  // namespace

std::vector<std::string> check_plan_input(const PlanInput& in) {
  std::vector<std::string> e;
  const auto& p = in.parts;
  if (!(p.r1_ohm > 0)) e.push_back("--r1 must be > 0 ohm");
  if (!(p.c_farad > 0)) e.push_back("--c must be > 0 F");
  if (!(p.r2_ohm >= 0)) e.push_back("--r2 must be >= 0 ohm (or none)");
  if (!(in.rail_v > 0)) e.push_back("--rail must be > 0 V");
  if (in.adc_bits < 2 || in.adc_bits > 32) e.push_back("--adc-bits must be between 2 and 32");
  if (!(in.full_scale_v > 0)) e.push_back("--full-scale must be > 0 V");
  if (!(in.adc_gain > 0)) e.push_back("--adc-gain must be > 0");
  if (!(in.margin >= 0 && in.margin < 1)) e.push_back("--margin must be >= 0 and < 1");
  if (!(in.reset_dead_s >= 0)) e.push_back("--dead-time must be >= 0 s");
  if (!(in.settle_s >= 0)) e.push_back("--settle must be >= 0 s");
  if (!(in.sample_period_s > 0)) e.push_back("--sample-period must be > 0 s");
  if (in.end_window < 2) e.push_back("--end-window must be >= 2");
  if (!(in.noise_v >= 0)) e.push_back("--noise must be >= 0 V");
  if (!(in.zero_window_s >= 0)) e.push_back("--zero-window must be >= 0 s");
  if (!(in.duration_s > 0)) e.push_back("--duration must be > 0 s");
  if (in.pulsed) {
    if (!(in.pulse_quantity > 0)) e.push_back("--pulse: the quantity per pulse must be > 0");
    if (!(in.pulse_width_s > 0)) e.push_back("--pulse: the width must be > 0 s");
    if (!(in.pulse_rate_hz > 0)) e.push_back("--pulse: the rate must be > 0 per second");
    if (in.pulse_rate_hz > 0 && in.pulse_width_s * in.pulse_rate_hz > 1)
      e.push_back("--pulse: pulses overlap (width * rate > 1)");
  } else {
    if (!(in.input_min >= 0 && in.input_max >= in.input_min && in.input_max > 0))
      e.push_back("--input MIN:MAX needs 0 <= MIN <= MAX and MAX > 0 (magnitudes, quantity per second)");
  }
  if (in.interval_s && !(*in.interval_s > 0)) e.push_back("--interval must be > 0 s");
  if (in.threshold_v && !(*in.threshold_v > 0)) e.push_back("--threshold must be > 0 V");
  return e;
}

Plan make_plan(const PlanInput& in) {
  Plan p;
  const chain::FrontEndResponse r(in.parts);
  chain::Calibration cal;
  cal.sensor = in.sensor;
  cal.front_end.r1_ohm = in.parts.r1_ohm;
  cal.front_end.c_farad = in.parts.c_farad;
  p.unit = std::string(cal.unit());

  p.has_r2 = r.has_r2();
  p.dc_gain = r.dc_gain();
  p.dc_gain_db = r.dc_gain_db();
  p.corner_hz = r.corner_hz();
  p.unity_gain_approx_hz = r.unity_gain_approx_hz();
  p.unity_gain_hz = r.unity_gain_hz();
  p.band_1pct_from_hz = r.integrating_from_hz(0.01);
  p.band_01pct_from_hz = r.integrating_from_hz(0.001);

  p.drift_offset_v_per_s = r.drift_from_offset_v_per_s();
  p.drift_bias_v_per_s = r.drift_from_bias_v_per_s();
  p.drift_v_per_s = r.drift_v_per_s();
  p.drift_settles_at_v = r.drift_settles_at_v();

  // Output volts per unit of input quantity: 1/C for charge, 1/(R1*C) for volt-seconds.
  p.volts_per_unit = 1.0 / std::fabs(cal.quantity_per_volt());
  p.saturation_v = std::min(in.rail_v, in.clip_fraction * in.full_scale_v / in.adc_gain);
  // With C shorted the output sits at the offset voltage; the switch leaves the pedestal on top.
  p.start_v = std::fabs(in.parts.offset_v) + std::fabs(in.pedestal_v);
  // The drift is taken to add to the input: the worst case for saturation.
  if (in.pulsed) {
    p.pulse_step_v = in.pulse_quantity * p.volts_per_unit;
    const double mean_v_per_s = in.pulse_quantity * in.pulse_rate_hz * p.volts_per_unit;
    p.rate_max_v_per_s = mean_v_per_s + p.drift_v_per_s;
    p.rate_min_v_per_s = p.rate_max_v_per_s;
  } else {
    p.rate_max_v_per_s = in.input_max * p.volts_per_unit + p.drift_v_per_s;
    p.rate_min_v_per_s = in.input_min * p.volts_per_unit + p.drift_v_per_s;
  }
  p.t_sat_drift_s = r.time_to_reach_s(p.drift_v_per_s, p.start_v, p.saturation_v);
  p.t_sat_max_s = r.time_to_reach_s(p.rate_max_v_per_s, p.start_v + p.pulse_step_v, p.saturation_v);

  p.threshold_given = bool(in.threshold_v);
  // Leave `margin` of the headroom free, and room for one more pulse.
  p.threshold_v = in.threshold_v ? *in.threshold_v
                                 : p.start_v + (1.0 - in.margin) * (p.saturation_v - p.start_v) - p.pulse_step_v;
  p.interval_given = bool(in.interval_s);
  p.interval_s = in.interval_s ? in.interval_s : r.time_to_reach_s(p.rate_max_v_per_s, p.start_v, p.threshold_v);
  p.interval_min_input_s =
      in.interval_s ? in.interval_s : r.time_to_reach_s(p.rate_min_v_per_s, p.start_v, p.threshold_v);

  p.dead_per_reset_s = in.reset_dead_s + in.settle_s;
  const auto fraction = [&](std::optional<double> t) { return t ? p.dead_per_reset_s / (*t + p.dead_per_reset_s) : 0.0; };
  p.dead_fraction_max = fraction(p.interval_s);
  p.dead_fraction_min = fraction(p.interval_min_input_s);
  const auto resets = [&](std::optional<double> t) { return t ? in.duration_s / (*t + p.dead_per_reset_s) : 0.0; };
  p.resets_max = resets(p.interval_s);
  p.resets_min = resets(p.interval_min_input_s);
  p.dead_estimated_fraction = p.dead_fraction_max;
  const double max_quantity_per_s =
      in.pulsed ? in.pulse_quantity * in.pulse_rate_hz : in.input_max;
  // The daemon estimates a dead interval from the rates either side. A steady
  // input that steps across its whole range inside the gap leaves at most half
  // of (max - min)*gap unexplained; a pulse inside the gap is not seen by
  // either rate, so the worst case is one pulse per reset.
  p.dead_error_per_reset =
      in.pulsed ? in.pulse_quantity : 0.5 * (in.input_max - in.input_min) * p.dead_per_reset_s;
  const double segment_content = p.interval_s ? max_quantity_per_s * *p.interval_s : 0.0;
  p.dead_error_relative = segment_content > 0 ? p.dead_error_per_reset / segment_content : 0.0;

  // Floors. Quantisation LSB/sqrt(12) (uniform error); a least-squares line
  // over M samples read at its last point has se = sigma*sqrt(1/M + 3(M-1)/(M(M+1))).
  p.lsb_v = in.full_scale_v / std::ldexp(1.0, in.adc_bits - 1) / in.adc_gain;
  p.quantisation_sigma_v = p.lsb_v / std::sqrt(12.0);
  p.reading_sigma_v = std::hypot(in.noise_v, p.quantisation_sigma_v);
  const double m = in.end_window;
  const double end_se = p.reading_sigma_v * std::sqrt(1.0 / m + 3.0 * (m - 1.0) / (m * (m + 1.0)));
  p.segment_sigma_v = std::sqrt(2.0) * end_se;
  p.segment_sigma_quantity = p.segment_sigma_v / p.volts_per_unit;
  p.segment_sigma_relative = segment_content > 0 ? p.segment_sigma_quantity / segment_content : 0.0;
  if (in.zero_window_s > 0) {
    // Slope of a line fitted over N evenly spaced readings spanning T: se = sigma/sqrt(N*T^2/12).
    const double n = in.zero_window_s / in.sample_period_s;
    p.drift_slope_se_v_per_s = p.reading_sigma_v / std::sqrt(n * in.zero_window_s * in.zero_window_s / 12.0);
    if (p.interval_s) p.drift_sigma_per_segment_v = p.drift_slope_se_v_per_s * *p.interval_s;
  }

  // The longest the integrator must hold a result: the longest segment.
  const double hold_s = p.interval_min_input_s ? *p.interval_min_input_s : in.duration_s;
  p.signal_low_hz = 1.0 / (2.0 * std::numbers::pi * hold_s);
  p.droop_per_segment = r.droop_of_constant(hold_s);

  // Warnings.
  auto warn = [&](std::string code, std::string text) { p.warnings.push_back({std::move(code), std::move(text)}); };
  if (p.has_r2 && in.parts.r2_ohm < 10.0 * in.parts.r1_ohm)
    warn("r2_below_10_r1", fmt("R2 = %.4g ohm is below 10*R1 = %.4g ohm (common practice: R2 >= 10*R1); "
                               "the DC gain is only %.3g",
                               in.parts.r2_ohm, 10.0 * in.parts.r1_ohm, p.dc_gain));
  if (p.has_r2 && !p.unity_gain_hz)
    warn("no_unity_crossing", fmt("R2 <= R1: the gain never reaches 1 (DC gain %.3g)", p.dc_gain));
  if (p.has_r2 && p.signal_low_hz < p.band_1pct_from_hz)
    warn("band_misses_signal",
         fmt("the signal is held for up to %.4g s (down to %.3g Hz) but the circuit integrates within 1 %% of "
             "ideal only from %.3g Hz",
             hold_s, p.signal_low_hz, p.band_1pct_from_hz) +
             fmt("; R2 leaks %.3g %% of a steady input over that hold", 100.0 * p.droop_per_segment));
  if (p.interval_given && p.t_sat_drift_s && *in.interval_s > *p.t_sat_drift_s)
    warn("drift_saturates_between_resets",
         fmt("drift alone saturates the output after %.4g s, before the %.4g s reset interval", *p.t_sat_drift_s,
             *in.interval_s));
  else if (p.interval_given && p.t_sat_max_s && *in.interval_s > *p.t_sat_max_s)
    warn("input_saturates_between_resets",
         fmt("at the maximum input the output saturates after %.4g s, before the %.4g s reset interval",
             *p.t_sat_max_s, *in.interval_s));
  if (!p.interval_given && !p.interval_s)
    warn("threshold_never_reached",
         fmt("at the maximum input the output settles at %.4g V, below the %.4g V threshold: with this R2 the "
             "integrator never needs a reset, and it never integrates a steady input either",
             p.rate_max_v_per_s * in.parts.r2_ohm * in.parts.c_farad, p.threshold_v));
  if (p.threshold_given && p.threshold_v >= p.saturation_v)
    warn("threshold_above_saturation", fmt("the %.4g V threshold is at or above the %.4g V saturation level",
                                           p.threshold_v, p.saturation_v));
  if (p.threshold_v <= p.start_v)
    warn("no_headroom", fmt("the threshold %.4g V is not above the %.4g V a segment starts from", p.threshold_v,
                            p.start_v));
  if (in.pulsed && p.pulse_step_v >= p.saturation_v - p.start_v)
    warn("pulse_exceeds_headroom", fmt("one pulse steps the output by %.4g V, more than the %.4g V of headroom",
                                       p.pulse_step_v, p.saturation_v - p.start_v));
  return p;
}

}  // namespace accrue::client
