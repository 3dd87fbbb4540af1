#pragma once
// `accrue reprocess`: new derivations of stored runs with a corrected
// calibration or baseline (see reprocess_command.cpp and storage/reprocess.hpp).
#include <string>
#include <vector>

#include "tools/accrue/commands.hpp"

namespace accrue::client {

int cmd_reprocess(const CommonOptions& o, const std::vector<std::string>& args);

}  // namespace accrue::client
