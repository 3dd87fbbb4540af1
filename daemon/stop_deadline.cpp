#include "daemon/stop_deadline.hpp"

#include <chrono>

namespace accrue::daemon {

StopDeadline::StopDeadline(double limit_s, std::function<void()> on_expire) {
  thread_ = std::thread([this, limit_s, on_expire = std::move(on_expire)] {
    std::unique_lock lock(mutex_);
    if (!cv_.wait_for(lock, std::chrono::duration<double>(limit_s), [this] { return disarmed_; })) on_expire();
  });
}

void StopDeadline::disarm() {
  {
    std::lock_guard lock(mutex_);
    disarmed_ = true;
  }
  cv_.notify_all();
}

StopDeadline::~StopDeadline() {
  disarm();
  if (thread_.joinable()) thread_.join();
}

}  // namespace accrue::daemon
