#pragma once
// Sink is one client connection seen from the daemon: lines (one JSON-RPC
// message each, newline added by the sink) are queued without blocking. A
// sink whose queue is over its limit cuts its client off (with an error
// notification when possible) and refuses further lines; the caller only
// learns false and carries on.
#include <cstdint>
#include <string>

namespace accrue::daemon::api {

class Sink {
 public:
  virtual ~Sink() = default;
  // A notification: dropping it would silently lose live data, so a full queue cuts the client off.
  virtual bool notify(std::string line) = 0;
  virtual bool open() const = 0;
};

}  // namespace accrue::daemon::api
