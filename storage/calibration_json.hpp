#pragma once
// Calibration <-> the JSON text of calibration.definition. The text is also
// the calibration's identity in the store (the Writer reuses a version whose
// definition is the same text), so there is exactly one way to write it.
#include <optional>
#include <string>

#include "daemon/chain/calibration.hpp"

namespace accrue::storage {

std::string calibration_definition(const chain::Calibration& cal);
// nullopt when the text lacks a field or has the wrong type; id is left 0.
std::optional<chain::Calibration> calibration_from_definition(const std::string& text);

}  // namespace accrue::storage
