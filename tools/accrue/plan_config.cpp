#include "tools/accrue/plan_config.hpp"

#include <nlohmann/json.hpp>
#include <sstream>

#include "tools/accrue/plan_report.hpp"

namespace accrue::client {

std::string emit_config(const PlanInput& in, const Plan& p, const EmitSettings& s) {
  nlohmann::ordered_json channel;
  channel["channel"] = s.channel;
  channel["sensor"] = std::string(chain::to_string(in.sensor));
  channel["c_farad"] = in.parts.c_farad;
  channel["r1_ohm"] = in.parts.r1_ohm;
  channel["r2_ohm"] = in.parts.r2_ohm;  // 0 = none
  channel["gain"] = in.adc_gain;
  channel["inverting"] = s.inverting;
  nlohmann::ordered_json j;
  j["device"] = s.device;
  j["settle_s"] = in.settle_s;
  j["end_window"] = in.end_window;
  j["channels"] = nlohmann::ordered_json::array({channel});
  // The daemon resets at a fraction of the ADC's full scale (in output volts)
  // and, as a backstop, on an interval: the planned interval is the time to
  // the threshold at the maximum input, so the threshold acts when the input
  // goes beyond the plan.
  nlohmann::ordered_json schedule = nlohmann::ordered_json::object();
  const double full_scale_out_v = in.full_scale_v / in.adc_gain;
  const double fraction = p.threshold_v / full_scale_out_v;
  if (fraction > 0 && fraction <= 1) schedule["threshold_fraction"] = fraction;
  if (p.interval_s && *p.interval_s >= 0.001 && *p.interval_s <= 31.0 * 86400) schedule["interval_s"] = *p.interval_s;
  if (!schedule.empty()) j["reset_schedule"] = schedule;

  std::ostringstream o;
  o << "// accrued config: calibration and schedule part, written by `accrue plan`.\n";
  o << "// Front end: R1 " << si_text(in.parts.r1_ohm, "ohm") << ", C " << si_text(in.parts.c_farad, "F") << ", R2 "
    << (p.has_r2 ? si_text(in.parts.r2_ohm, "ohm") : std::string("none")) << ".\n";
  o << "// Reset schedule from the plan: threshold " << si_text(p.threshold_v, "V") << ", interval "
    << (p.interval_s ? si_text(*p.interval_s, "s") : std::string("none (the threshold is never reached)"))
    << "; dead time per reset " << si_text(p.dead_per_reset_s, "s") << ".\n";
  o << "// \"device\" is required by accrued: set it to the board's port.\n";
  o << j.dump(2) << "\n";
  return o.str();
}

}  // namespace accrue::client
