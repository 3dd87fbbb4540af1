#pragma once
// Writer owns the database's only writing connection and the thread that uses
// it. submit() never touches the disk: it queues a Batch and returns. The
// thread commits everything queued in one transaction at most every
// commit_interval, the running-total checkpoints in the same transaction as
// the rows they cover, so after a crash the file holds a consistent prefix.
//
// Overload policy (explicit and counted): above soft_limit_bytes of queued
// data, new raw blocks are shed; above hard_limit_bytes, new series points are
// shed too and an event says so. Segments, baselines, events and checkpoints
// are never shed: they are small, and the checkpoint carries the total, so a
// shed series point never corrupts it. A failed commit is rolled back and
// retried with the same rows on the next cycle.
#include <chrono>
#include <condition_variable>
#include <cstdint>
#include <deque>
#include <functional>
#include <map>
#include <memory>
#include <mutex>
#include <string>
#include <thread>
#include <utility>
#include <vector>

#include "daemon/chain/calibration.hpp"
#include "storage/batch.hpp"
#include "storage/database.hpp"

namespace accrue::storage {

struct WriterSettings {
  std::chrono::milliseconds commit_interval{250};
  std::size_t soft_limit_bytes = 64u << 20;
  std::size_t hard_limit_bytes = 256u << 20;
};

struct WriterCounters {
  std::uint64_t batches_accepted = 0;
  std::uint64_t commits = 0;
  std::uint64_t commit_failures = 0;
  std::uint64_t raw_blocks_written = 0;
  std::uint64_t raw_blocks_shed = 0;
  std::uint64_t series_points_written = 0;
  std::uint64_t series_points_shed = 0;
  std::uint64_t segments_written = 0;
  std::uint64_t events_written = 0;
  std::size_t queued_bytes = 0;
  double last_commit_unix = 0.0;
  std::string last_error;
  std::map<int, std::uint64_t> committed_last_index;  // per channel, from checkpoints
};

class Writer {
 public:
  using Clock = std::function<double()>;  // Unix seconds; injected for tests

  // Opens (creating if needed) and migrates the file; the thread is not started yet.
  static Status open(const std::string& path, WriterSettings settings, Clock clock, std::unique_ptr<Writer>& out);
  ~Writer();

  // Sets calibration.id to the stored version with exactly this definition, or
  // to a new immutable version written before the next batch. Thread-safe;
  // never touches the disk.
  Status ensure_calibration(int channel, chain::Calibration& calibration);
  // Before start(): the next free run id.
  Status next_run_id(std::int64_t& out);

  void start();
  void submit(Batch batch);
  // Commits everything queued, stops the thread. Idempotent.
  void stop();
  WriterCounters counters() const;

 private:
  Writer(std::unique_ptr<Database> db, WriterSettings settings, Clock clock);
  struct CalibrationRow {
    std::int64_t id;
    int channel;
    double created_unix;
    std::string quantity, unit;
    double quantity_per_volt;
    std::string definition;
  };
  Status prepare_statements();
  Status load_calibrations();
  Status write_calibrations(const std::vector<CalibrationRow>& rows);
  void thread_main();
  Status commit(std::deque<Batch>& pending, std::vector<CalibrationRow>& calibrations);
  Status write_batch(const Batch& b);

  std::unique_ptr<Database> db_;
  WriterSettings settings_;
  Clock clock_;
  struct Statements;
  std::unique_ptr<Statements> st_;

  mutable std::mutex mutex_;
  std::condition_variable wake_;
  std::deque<Batch> queue_;
  std::map<std::pair<int, std::string>, std::int64_t> calibration_ids_;  // (channel, definition) -> id
  std::int64_t next_calibration_id_ = 1;
  std::vector<CalibrationRow> new_calibrations_;
  bool stopping_ = false;
  bool shed_notice_pending_ = false;
  WriterCounters counters_;
  std::thread thread_;
};

}  // namespace accrue::storage
