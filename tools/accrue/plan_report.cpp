#include "tools/accrue/plan_report.hpp"

#include <cmath>
#include <cstdio>
#include <sstream>

namespace accrue::client {
namespace {

using nlohmann::json;

json opt(const std::optional<double>& v) { return v ? json(*v) : json(nullptr); }
json finite(double v) { return std::isfinite(v) ? json(v) : json(nullptr); }

std::string num(double v, int digits = 4) {
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*g", digits, v);
  return buf;
}

std::string duration_text(const std::optional<double>& s) {
  if (!s) return "never";
  if (*s < 1.0) return si_text(*s, "s");
  std::string t = num(*s, 5) + " s";
  if (*s >= 3600) t += " (" + num(*s / 3600.0, 3) + " h)";
  else if (*s >= 120) t += " (" + num(*s / 60.0, 3) + " min)";
  return t;
}

}  // namespace

std::string si_text(double value, const std::string& unit, int digits) {
  if (!std::isfinite(value)) return std::string(value > 0 ? "unbounded" : "undefined");
  if (value == 0) return "0 " + unit;
  static const struct {
    double factor;
    const char* prefix;
  } prefixes[] = {{1e9, "G"}, {1e6, "M"}, {1e3, "k"}, {1, ""}, {1e-3, "m"}, {1e-6, "µ"}, {1e-9, "n"}, {1e-12, "p"}};
  const double a = std::fabs(value);
  for (const auto& p : prefixes)
    if (a >= p.factor * 0.9999995 || p.factor == 1e-12) return num(value / p.factor, digits) + " " + p.prefix + unit;
  return num(value, digits) + " " + unit;
}

json plan_to_json(const PlanInput& in, const Plan& p) {
  json j;
  j["sensor"] = std::string(chain::to_string(in.sensor));
  j["unit"] = p.unit;
  j["r1_ohm"] = in.parts.r1_ohm;
  j["c_farad"] = in.parts.c_farad;
  j["r2_ohm"] = p.has_r2 ? json(in.parts.r2_ohm) : json(nullptr);
  j["dc_gain"] = finite(p.dc_gain);
  j["dc_gain_db"] = finite(p.dc_gain_db);
  j["corner_hz"] = p.has_r2 ? json(p.corner_hz) : json(nullptr);
  j["unity_gain_approx_hz"] = p.unity_gain_approx_hz;
  j["unity_gain_hz"] = opt(p.unity_gain_hz);
  j["band_1pct_from_hz"] = p.band_1pct_from_hz;
  j["band_01pct_from_hz"] = p.band_01pct_from_hz;
  j["signal_low_hz"] = p.signal_low_hz;
  j["droop_per_segment"] = p.droop_per_segment;
  j["drift_offset_v_per_s"] = p.drift_offset_v_per_s;
  j["drift_bias_v_per_s"] = p.drift_bias_v_per_s;
  j["drift_v_per_s"] = p.drift_v_per_s;
  j["drift_settles_at_v"] = finite(p.drift_settles_at_v);
  j["saturation_v"] = p.saturation_v;
  j["start_v"] = p.start_v;
  j["pulse_step_v"] = p.pulse_step_v;
  j["rate_max_v_per_s"] = p.rate_max_v_per_s;
  j["rate_min_v_per_s"] = p.rate_min_v_per_s;
  j["time_to_saturation_drift_s"] = opt(p.t_sat_drift_s);
  j["time_to_saturation_max_input_s"] = opt(p.t_sat_max_s);
  j["threshold_v"] = p.threshold_v;
  j["threshold_given"] = p.threshold_given;
  j["interval_s"] = opt(p.interval_s);
  j["interval_given"] = p.interval_given;
  j["interval_min_input_s"] = opt(p.interval_min_input_s);
  j["dead_per_reset_s"] = p.dead_per_reset_s;
  j["dead_fraction_max_input"] = p.dead_fraction_max;
  j["dead_fraction_min_input"] = p.dead_fraction_min;
  j["duration_s"] = in.duration_s;
  j["resets_max_input"] = p.resets_max;
  j["resets_min_input"] = p.resets_min;
  j["dead_estimated_fraction"] = p.dead_estimated_fraction;
  j["dead_error_per_reset"] = p.dead_error_per_reset;
  j["dead_error_relative"] = p.dead_error_relative;
  j["lsb_v"] = p.lsb_v;
  j["quantisation_sigma_v"] = p.quantisation_sigma_v;
  j["reading_sigma_v"] = p.reading_sigma_v;
  j["segment_sigma_v"] = p.segment_sigma_v;
  j["segment_sigma_quantity"] = p.segment_sigma_quantity;
  j["segment_sigma_relative"] = p.segment_sigma_relative;
  j["drift_slope_se_v_per_s"] = p.drift_slope_se_v_per_s;
  j["drift_sigma_per_segment_v"] = p.drift_sigma_per_segment_v;
  json w = json::array();
  for (const auto& x : p.warnings) w.push_back({{"code", x.code}, {"text", x.text}});
  j["warnings"] = w;
  return j;
}

std::string plan_to_text(const PlanInput& in, const Plan& p) {
  std::ostringstream o;
  const std::string& u = p.unit;
  o << "front end: R1 " << si_text(in.parts.r1_ohm, "ohm") << ", C " << si_text(in.parts.c_farad, "F") << ", R2 "
    << (p.has_r2 ? si_text(in.parts.r2_ohm, "ohm") : std::string("none")) << "; sensor "
    << chain::to_string(in.sensor) << " (" << u << ")\n\n";
  o << "response\n";
  if (p.has_r2) {
    o << "  DC gain                 " << num(p.dc_gain, 6) << " (" << num(p.dc_gain_db) << " dB)\n";
    o << "  corner fc               " << si_text(p.corner_hz, "Hz") << "  (1/(2 pi R2 C))\n";
  } else {
    o << "  DC gain                 the op-amp's open-loop gain (no R2)\n";
  }
  o << "  0 dB frequency          "
    << (p.unity_gain_hz ? si_text(*p.unity_gain_hz, "Hz") : std::string("none (R2 <= R1)"))
    << "  (1/(2 pi R1 C) = " << si_text(p.unity_gain_approx_hz, "Hz") << ")\n";
  if (p.has_r2) {
    o << "  integrates within 1 %   from " << si_text(p.band_1pct_from_hz, "Hz") << "\n";
    o << "  integrates within 0.1 % from " << si_text(p.band_01pct_from_hz, "Hz") << "\n";
    o << "  signal reaches down to  " << si_text(p.signal_low_hz, "Hz") << " (longest hold); leak over it "
      << num(100 * p.droop_per_segment, 3) << " %\n";
  } else {
    o << "  integrates at every frequency (ideal below the op-amp's bandwidth)\n";
  }
  o << "\ndrift (input at zero, worst case)\n";
  o << "  from offset             " << si_text(p.drift_offset_v_per_s, "V/s") << "\n";
  o << "  from bias current       " << si_text(p.drift_bias_v_per_s, "V/s") << "\n";
  o << "  total                   " << si_text(p.drift_v_per_s, "V/s");
  if (p.has_r2) o << ", settling at " << si_text(p.drift_settles_at_v, "V");
  o << "\n";
  o << "\nsaturation at " << si_text(p.saturation_v, "V") << " (rails and ADC clip level), segments start at "
    << si_text(p.start_v, "V") << "\n";
  o << "  time to saturation, drift alone    " << duration_text(p.t_sat_drift_s) << "\n";
  o << "  time to saturation, maximum input  " << duration_text(p.t_sat_max_s) << "\n";
  o << "\nreset schedule\n";
  o << "  threshold               " << si_text(p.threshold_v, "V")
    << (p.threshold_given ? " (given)" : " (" + num(100 * in.margin, 3) + " % of the headroom kept free)") << "\n";
  o << "  interval                " << duration_text(p.interval_s)
    << (p.interval_given ? " (given)" : " (time to the threshold at maximum input)") << "\n";
  if (!p.interval_given) o << "  at minimum input        " << duration_text(p.interval_min_input_s) << "\n";
  o << "  dead time per reset     " << si_text(p.dead_per_reset_s, "s") << " (switch + settle)\n";
  o << "  dead-time fraction      " << num(100 * p.dead_fraction_max, 3) << " % at maximum input, "
    << num(100 * p.dead_fraction_min, 3) << " % at minimum\n";
  o << "  resets in " << duration_text(in.duration_s) << "  " << num(p.resets_max, 4) << " at maximum input, "
    << num(p.resets_min, 4) << " at minimum\n";
  o << "  effect on the total     " << num(100 * p.dead_estimated_fraction, 3)
    << " % of it is estimated from the rates either side; worst case per reset "
    << si_text(p.dead_error_per_reset, u) << " (" << num(100 * p.dead_error_relative, 3) << " % of a segment)\n";
  o << "\nfloors per segment\n";
  o << "  ADC LSB                 " << si_text(p.lsb_v, "V") << ", quantisation " << si_text(p.quantisation_sigma_v, "V")
    << " rms (LSB/sqrt(12))\n";
  o << "  per reading             " << si_text(p.reading_sigma_v, "V") << " rms (noise and quantisation)\n";
  o << "  segment delta           " << si_text(p.segment_sigma_v, "V") << " = " << si_text(p.segment_sigma_quantity, u)
    << " (1 sigma, " << in.end_window << "-sample end fits; " << num(100 * p.segment_sigma_relative, 3)
    << " % of a full segment)\n";
  if (in.zero_window_s > 0)
    o << "  drift fit               slope se " << si_text(p.drift_slope_se_v_per_s, "V/s") << ", over a segment "
      << si_text(p.drift_sigma_per_segment_v, "V") << "\n";
  if (p.warnings.empty()) {
    o << "\nno warnings\n";
  } else {
    o << "\nwarnings\n";
    for (const auto& w : p.warnings) o << "  " << w.code << ": " << w.text << "\n";
  }
  return o.str();
}

}  // namespace accrue::client
