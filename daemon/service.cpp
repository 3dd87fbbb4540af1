#include "daemon/service.hpp"

#include <systemd/sd-daemon.h>

#include <cstdlib>

namespace accrue::daemon {

ServiceNotifier::ServiceNotifier() {
  enabled_ = std::getenv("NOTIFY_SOCKET") != nullptr;
  std::uint64_t usec = 0;
  if (enabled_ && sd_watchdog_enabled(0, &usec) > 0) watchdog_interval_ = std::chrono::microseconds(usec / 2);
}

void ServiceNotifier::ready(const std::string& status) {
  if (enabled_) (void)sd_notify(0, ("READY=1\nSTATUS=" + status).c_str());
}
void ServiceNotifier::watchdog() {
  if (enabled_) (void)sd_notify(0, "WATCHDOG=1");
}
void ServiceNotifier::stopping() {
  if (enabled_) (void)sd_notify(0, "STOPPING=1");
}
void ServiceNotifier::status(const std::string& text) {
  if (enabled_) (void)sd_notify(0, ("STATUS=" + text).c_str());
}

}  // namespace accrue::daemon
