#pragma once
// `accrue plan`: parses the front end and the expected input (engineering
// notation accepted), prints the plan, and optionally writes the Bode plot
// (--svg), the config part (--emit-config) and a comparison with a recorded
// run (--from-db). Needs no daemon. Exit codes as for the other subcommands:
// 0 ok, 1 a file could not be read or written (or a recorded run left the
// plan, with --from-db), 2 bad usage.
#include <string>
#include <vector>

namespace accrue::client {

extern const char* const kPlanUsage;
int cmd_plan(bool json, const std::vector<std::string>& args);

}  // namespace accrue::client
