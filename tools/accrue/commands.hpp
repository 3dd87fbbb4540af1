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
// commands_store.cpp
int cmd_channels(const CommonOptions& o, const std::vector<std::string>& args);
int cmd_calibration(const CommonOptions& o, const std::vector<std::string>& args);
int cmd_segments(const CommonOptions& o, const std::vector<std::string>& args);
int cmd_events(const CommonOptions& o, const std::vector<std::string>& args);
// commands_control.cpp
int cmd_reset(const CommonOptions& o, const std::vector<std::string>& args);
int cmd_zero(const CommonOptions& o, const std::vector<std::string>& args);
int cmd_quiet(const CommonOptions& o, const std::vector<std::string>& args);
int cmd_calibrate(const CommonOptions& o, const std::vector<std::string>& args);
// commands_live.cpp
int cmd_tail(const CommonOptions& o, const std::vector<std::string>& args);
// commands_files.cpp
int cmd_export(const CommonOptions& o, const std::vector<std::string>& args);
int cmd_plot(const CommonOptions& o, const std::vector<std::string>& args);

// "1.2346 µC" style text for a value in an SI unit.
std::string format_si(double value, const std::string& unit, int digits = 6);

}  // namespace accrue::client
