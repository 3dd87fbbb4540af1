#pragma once
// The daemon's settings: defaults, then a JSON config file (comments allowed),
// then command-line flags. load_config() checks every key and value and names
// the key and the reason for each error; unknown keys are errors.
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "daemon/chain/calibration.hpp"
#include "daemon/log.hpp"

namespace accrue::daemon {

// Per-channel calibration overrides; what is unset comes from the board's identity.
struct ChannelConfig {
  chain::SensorKind sensor = chain::SensorKind::charge;
  std::optional<double> c_farad, r1_ohm, r2_ohm, gain;
  std::optional<int> zero_code;
  bool inverting = true;
};

struct DaemonConfig {
  std::string device;  // path, usb-serial:SERIAL or usb-id:VVVV:PPPP
  int baud = 921600;
  std::string database = "accrue.db";
  std::string socket_path = "accrued.sock";
  double settle_s = 0.002;
  int end_window = 16;
  double series_interval_s = 1.0;
  int commit_interval_ms = 250;
  double reconnect_max_s = 30.0;
  LogLevel log_level = LogLevel::info;
  std::map<int, ChannelConfig> channels;
  std::string record_path;  // when set, every byte read is also written to this capture file
  std::string replay_path;  // when set, the capture is fed through the daemon instead of a device
};

struct ConfigError {
  std::string key;
  std::string reason;
};

// Applies the file's keys over `config`. Returns every error found (empty = ok).
std::vector<ConfigError> load_config(const std::string& path, DaemonConfig& config);
std::vector<ConfigError> load_config_text(const std::string& text, DaemonConfig& config);
std::vector<ConfigError> validate(const DaemonConfig& config);

}  // namespace accrue::daemon
