#pragma once
// StopDeadline bounds shutdown: once armed, a thread waits `limit_s`; if
// disarm() has not been called by then it runs `on_expire` (the daemon logs
// and exits non-zero, so systemd sees a failed stop rather than a hang). The
// destructor disarms and joins. Owns its thread; on_expire runs on it.
#include <condition_variable>
#include <functional>
#include <mutex>
#include <thread>

namespace accrue::daemon {

class StopDeadline {
 public:
  StopDeadline(double limit_s, std::function<void()> on_expire);
  ~StopDeadline();
  StopDeadline(const StopDeadline&) = delete;
  StopDeadline& operator=(const StopDeadline&) = delete;
  void disarm();

 private:
  std::mutex mutex_;
  std::condition_variable cv_;
  bool disarmed_ = false;
  std::thread thread_;
};

}  // namespace accrue::daemon
