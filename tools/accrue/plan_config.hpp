#pragma once
// Writes the calibration and schedule part of an accrued config from a plan,
// as JSON with comments (the daemon's config format, see README.md): device,
// settle_s, end_window, the channel's calibration and reset_schedule
// (threshold_fraction of full scale, interval_s). Only keys that accrued knows
// are written, so that `accrued --check-config` accepts the file. Pure.
#include <string>

#include "tools/accrue/plan.hpp"

namespace accrue::client {

struct EmitSettings {
  std::string device = "/dev/ttyUSB0";  // the config needs one; edit to the board's port
  int channel = 0;
  bool inverting = true;
};

std::string emit_config(const PlanInput& in, const Plan& p, const EmitSettings& s);

}  // namespace accrue::client
