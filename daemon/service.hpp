#pragma once
// ServiceNotifier speaks the systemd notify protocol through libsystemd:
// READY=1 once the store is open and the link is up or retrying, WATCHDOG=1
// keep-alives from the Asio loop, STOPPING=1 on shutdown, STATUS= lines. It is
// a no-op when NOTIFY_SOCKET is unset (not under systemd).
#include <chrono>
#include <string>

namespace accrue::daemon {

class ServiceNotifier {
 public:
  ServiceNotifier();
  bool enabled() const { return enabled_; }
  // Half the WatchdogSec systemd asked for, or zero when it asked for none.
  std::chrono::microseconds watchdog_interval() const { return watchdog_interval_; }
  void ready(const std::string& status);
  void watchdog();
  void stopping();
  void status(const std::string& text);

 private:
  bool enabled_ = false;
  std::chrono::microseconds watchdog_interval_{0};
};

}  // namespace accrue::daemon
