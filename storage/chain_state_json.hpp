#pragma once
// ChainState <-> JSON text, for the total_checkpoint.state column. Doubles are
// written with full round-trip precision so a resumed total is bit-exact.
#include <optional>
#include <string>

#include "daemon/chain/records.hpp"

namespace accrue::storage {

std::string chain_state_to_json(const chain::ChainState& s);
std::optional<chain::ChainState> chain_state_from_json(const std::string& text);

}  // namespace accrue::storage
