#pragma once
// The front-end plan: from an integrator's parts, its ADC, its reset switch
// and the expected input, everything an experimenter needs before a run
// (response, drift, time to saturation, a reset threshold and interval with
// margin, dead time, quantisation and noise per segment) and the warnings
// that follow. make_plan() is a pure function of its input; it uses the chain
// library's FrontEndResponse so that the planner and the daemon share one
// model. Voltages are integrator output volts; input quantities are in the
// sensor's SI unit (C for charge, V·s for volt-seconds) and their rates per second.
#include <optional>
#include <string>
#include <vector>

#include "daemon/chain/calibration.hpp"
#include "daemon/chain/front_end_response.hpp"

namespace accrue::client {

struct PlanInput {
  chain::SensorKind sensor = chain::SensorKind::charge;
  chain::FrontEndParts parts;  // R1, C, R2 (0 = none), Vos, Ib
  double rail_v = 12.0;        // symmetric rails, |V|
  int adc_bits = 24;
  double full_scale_v = 10.0;  // bipolar ADC, +-full_scale_v at its input
  double adc_gain = 1.0;       // between integrator output and ADC input
  double clip_fraction = 0.98; // the daemon's clip level (ChainSettings::clip_fraction)
  double reset_dead_s = 0.0;   // switch closed
  double pedestal_v = 0.0;     // output left after a reset (charge injection)
  double settle_s = 0.002;     // the daemon discards this after each reset (config settle_s)
  double sample_period_s = 1e-3;
  int end_window = 16;         // samples fitted at each segment end (config end_window)
  double noise_v = 0.0;        // output noise per reading, rms
  double zero_window_s = 0.0;  // length of the drift-fit zero window, 0 = none planned
  double margin = 0.2;         // fraction of the headroom kept free below the saturation level
  double duration_s = 8 * 3600.0;
  // Expected input: a steady rate range, or pulses.
  bool pulsed = false;
  double input_min = 0.0, input_max = 0.0;  // quantity per second
  double pulse_quantity = 0.0, pulse_width_s = 0.0, pulse_rate_hz = 0.0;
  // The user's own schedule, to be checked instead of the planned one.
  std::optional<double> interval_s;
  std::optional<double> threshold_v;
};

struct PlanWarning {
  std::string code;  // stable name: r2_below_10_r1, band_misses_signal, ...
  std::string text;
};

struct Plan {
  // Response.
  bool has_r2 = false;
  double dc_gain = 0, dc_gain_db = 0, corner_hz = 0;
  double unity_gain_approx_hz = 0;
  std::optional<double> unity_gain_hz;
  double band_1pct_from_hz = 0, band_01pct_from_hz = 0;
  double signal_low_hz = 0;  // 1/(2*pi*longest hold): the lowest frequency the signal needs
  double droop_per_segment = 0;  // relative shortfall of a constant held for the longest segment
  // Drift.
  double drift_offset_v_per_s = 0, drift_bias_v_per_s = 0, drift_v_per_s = 0;
  double drift_settles_at_v = 0;  // +inf without R2
  // Levels and times.
  double volts_per_unit = 0;      // output volts per unit of input quantity, |1/quantity_per_volt|
  double saturation_v = 0;        // min(rail, clip level of the ADC)
  double start_v = 0;             // |Vos| + |pedestal|: where each segment starts
  double pulse_step_v = 0;        // output step of one pulse
  double rate_max_v_per_s = 0, rate_min_v_per_s = 0;  // input plus drift
  std::optional<double> t_sat_drift_s, t_sat_max_s;   // empty = never
  double threshold_v = 0;         // reset when |Vout| reaches this
  bool threshold_given = false;
  std::optional<double> interval_s;      // reset interval (time to threshold at maximum input); empty = never reached
  bool interval_given = false;
  std::optional<double> interval_min_input_s;  // longest segment, at minimum input
  double dead_per_reset_s = 0;
  double dead_fraction_max = 0, dead_fraction_min = 0;
  double resets_max = 0, resets_min = 0;  // over duration_s at maximum / minimum input
  double dead_estimated_fraction = 0;     // of the total, at maximum input
  double dead_error_per_reset = 0;        // worst-case estimate error per reset, in quantity
  double dead_error_relative = 0;         // that, against one segment's content at maximum input
  // Floors.
  double lsb_v = 0, quantisation_sigma_v = 0, reading_sigma_v = 0;
  double segment_sigma_v = 0, segment_sigma_quantity = 0, segment_sigma_relative = 0;
  double drift_slope_se_v_per_s = 0, drift_sigma_per_segment_v = 0;
  std::string unit;
  std::vector<PlanWarning> warnings;
};

// Checks that the input describes a circuit (positive parts, bits in range, ...).
// Returns the errors found, each naming the option; empty = fine.
std::vector<std::string> check_plan_input(const PlanInput& in);
Plan make_plan(const PlanInput& in);

}  // namespace accrue::client
