#pragma once
// The accrue subcommands. Each takes its arguments (after the subcommand
// name) and the shared options, prints readable text or JSON, and returns the
// process exit code: 0 ok, 1 the daemon answered with an error or a check
// failed, 2 bad usage.
#include <string>
#include <vector>

namespace accrue::client {

struct CommonOptions {
  std::string socket_path = "accrued.sock";
  bool json = false;
};

int cmd_status(const CommonOptions& o, const std::vector<std::string>& args);
int cmd_totals(const CommonOptions& o, const std::vector<std::string>& args);
int cmd_runs(const CommonOptions& o, const std::vector<std::string>& args);
int cmd_window(const CommonOptions& o, const std::vector<std::string>& args);
int cmd_compare(const CommonOptions& o, const std::vector<std::string>& args);
int cmd_wait(const CommonOptions& o, const std::vector<std::string>& args);

// "1.2346 µC" style text for a value in an SI unit.
std::string format_si(double value, const std::string& unit, int digits = 6);

}  // namespace accrue::client
