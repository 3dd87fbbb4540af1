#pragma once
// ChainSettings <-> JSON text, for derivation_channel.settings: what a
// derivation's chain ran with, so reprocessing can run it again exactly.
// Doubles keep full round-trip precision. baseline_text() names the baseline
// choice in words ("linear none", "quadratic huber") for the baseline column.
#include <optional>
#include <string>

#include "daemon/chain/channel_chain.hpp"

namespace accrue::storage {

std::string chain_settings_to_json(const chain::ChainSettings& s);
// nullopt when the text is not an object of the expected fields and types.
std::optional<chain::ChainSettings> chain_settings_from_json(const std::string& text);
std::string baseline_text(const chain::ChainSettings& s);
bool parse_baseline_model(const std::string& text, chain::BaselineModel& out);
bool parse_baseline_robust(const std::string& text, chain::BaselineRobust& out);

}  // namespace accrue::storage
