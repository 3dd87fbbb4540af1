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

  std::ostringstream o;
  o << "// accrued config: calibration and schedule part, written by `accrue plan`.\n";
  o << "// Front end: R1 " << si_text(in.parts.r1_ohm, "ohm") << ", C " << si_text(in.parts.c_farad, "F") << ", R2 "
    << (p.has_r2 ? si_text(in.parts.r2_ohm, "ohm") : std::string("none")) << ".\n";
  o << "// Reset schedule from the plan (set it on the board; this config has no key for it yet):\n";
  o << "//   threshold " << si_text(p.threshold_v, "V") << ", or an interval of "
    << (p.interval_s ? si_text(*p.interval_s, "s") : std::string("(never reached)"))
    << "; dead time per reset " << si_text(p.dead_per_reset_s, "s") << ".\n";
  o << "// \"device\" is required by accrued: set it to the board's port.\n";
  o << j.dump(2) << "\n";
  return o.str();
}

}  // namespace accrue::client
