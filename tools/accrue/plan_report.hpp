#pragma once
// The plan as readable text and as JSON (the same numbers; JSON carries SI
// values with unit-suffixed names, never formatted strings). Pure functions.
#include <string>

#include <nlohmann/json.hpp>

#include "tools/accrue/plan.hpp"

namespace accrue::client {

nlohmann::json plan_to_json(const PlanInput& in, const Plan& p);
std::string plan_to_text(const PlanInput& in, const Plan& p);
// "4.70 nF"-style text: the value scaled to an SI prefix from p to G.
std::string si_text(double value, const std::string& unit, int digits = 4);

}  // namespace accrue::client
