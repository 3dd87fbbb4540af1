#pragma once
// Reprocessor is what the API may ask of the daemon's reprocessing: start
// recomputing a stored run as a new derivation (storage/reprocess.hpp) in the
// background. Progress and the outcome go to the asking client as
// notifications ("reprocess_progress", "reprocess_done"; docs/api.md). The
// daemon's main wires it (daemon/reprocess_jobs.hpp); start() runs on the
// Asio thread and must not block.
#include <memory>

#include "daemon/api/control.hpp"
#include "daemon/api/sink.hpp"
#include "storage/reprocess.hpp"

namespace accrue::daemon::api {

class Reprocessor {
 public:
  virtual ~Reprocessor() = default;
  // ok with detail {"job": N, "run_id": R} when started; refused with the reason otherwise.
  virtual ControlResult start(storage::ReprocessRequest request, std::weak_ptr<Sink> sink, bool progress) = 0;
};

}  // namespace accrue::daemon::api
