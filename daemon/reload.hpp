#pragma once
// Config reload (SIGHUP): compares the running config with a freshly loaded
// one and says what can change in place (calibrations, reset schedule, zero
// windows, log level) and what needs a restart (device, link, storage, API,
// anything else). A new config with any error is refused whole: the caller
// keeps the old one. Pure: no I/O, no logging.
#include <string>
#include <vector>

#include "daemon/options.hpp"

namespace accrue::daemon {

struct ReloadPlan {
  std::vector<ConfigError> errors;         // non-empty: refuse, keep the old config
  std::vector<std::string> applied;        // keys that change in place
  std::vector<std::string> need_restart;   // keys that changed but keep their old value until restart
  DaemonConfig next;                       // the running config after the reload
};

// `fresh` was loaded with `load_errors` (from load_config plus validate).
ReloadPlan plan_reload(const DaemonConfig& running, const DaemonConfig& fresh, std::vector<ConfigError> load_errors);

}  // namespace accrue::daemon
