#pragma once
// ReprocessJobs runs the API's reprocessing requests (api::Reprocessor), one
// at a time, each on its own thread with its own SQLite connection, so ingest
// and queries carry on. New calibration versions go through the daemon's
// Writer (the file's only allocator of calibration ids while it runs); the
// job waits until the Writer has committed them. Notifications are posted to
// the Asio thread and handed to the client's sink there; a client that has
// gone away simply gets none. Progress is sent at most every 1 % of the run.
// The run being recorded is refused (its raw blocks are still arriving).
// Destruction cancels a running job and joins its thread.
#include <atomic>
#include <cstdint>
#include <functional>
#include <mutex>
#include <optional>
#include <string>
#include <thread>

#include "daemon/api/reprocessor.hpp"
#include "daemon/asio.hpp"
#include "storage/writer.hpp"

namespace accrue::daemon {

class ReprocessJobs : public api::Reprocessor {
 public:
  using LiveRun = std::function<std::optional<std::int64_t>()>;  // the run being recorded, if any
  ReprocessJobs(asio::io_context& io, std::string database, storage::Writer& writer, LiveRun live_run,
                std::function<double()> clock);
  ~ReprocessJobs() override;

  api::ControlResult start(storage::ReprocessRequest request, std::weak_ptr<api::Sink> sink, bool progress) override;

 private:
  void run(std::int64_t job, storage::ReprocessRequest request, std::weak_ptr<api::Sink> sink, bool progress);
  void post(std::weak_ptr<api::Sink> sink, std::string line);
  storage::Status calibration_id(int channel, chain::Calibration& calibration);

  asio::io_context& io_;
  std::string database_;
  storage::Writer& writer_;
  LiveRun live_run_;
  std::function<double()> clock_;
  std::thread thread_;
  std::atomic<bool> busy_{false};
  std::atomic<bool> cancel_{false};
  std::int64_t next_job_ = 1;
};

}  // namespace accrue::daemon
