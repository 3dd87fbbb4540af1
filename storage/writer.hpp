#pragma once
// Writer owns the database's only writing connection and the thread that uses
// it. submit() never touches the disk: it queues a Batch and returns. Raw
// blocks come encoded by the producer (RawBlockRow::set_codes), so the queue
// holds the bytes that will be stored and the thread only writes them. The
// thread commits everything queued in one transaction at most every
// commit_interval, with the running-total checkpoints and the rollup buckets
// in the same transaction as the rows they cover, so after a crash the file
// holds a consistent prefix and a restart resumes exactly from the last commit.
//
// Overload policy (explicit and counted): a batch that would take the queue
// above soft_limit_bytes has its raw blocks shed (so the queue is within the
// soft limit whenever a raw block is taken); one whose derived rows would
// take it above hard_limit_bytes has its series points shed too; an event says
// so once the queue is below half the soft limit again. Queued bytes are
// Batch::raw_bytes() (encoded bytes allocated) plus Batch::derived_bytes(). Segments, baselines, events and checkpoints
// are never shed: they are small, and the checkpoint carries the total, so a
// shed series point never corrupts it. A failed commit is rolled back and
// retried with the same rows on the next cycle.
//
// Disk policy: when free space (free_bytes) falls below disk_floor_bytes, or
// a commit fails with SQLITE_FULL, raw blocks stop first: they are shed
// (counted in raw_blocks_shed_disk) and a "raw_writing_stopped" event is
// written; derived rows, events and checkpoints carry on while they fit. Raw
// writing resumes, with a "raw_writing_resumed" event, once free space is
// back above the floor (plus a tenth, so it does not flap) or, after a
// SQLITE_FULL, once a probe commit with raw rows succeeds (every
// full_retry_interval).
//
// WAL: SQLite's automatic checkpoint is replaced by a passive checkpoint after
// each commit once the log holds wal_checkpoint_frames, and journal_size_limit
// truncates the WAL file when it restarts, so the WAL stays bounded as long as
// readers keep their read transactions short (every Reader query is one).
//
// Failing writes (read-only remount, I/O errors, a full file that takes no
// derived rows either): the failed transaction is rolled back and everything
// stays queued; the next attempt waits twice as long each time, from
// commit_interval up to max_retry_interval. The queue limits above still hold,
// so raw blocks, then series points, are shed only once the queue is full
// (counted, and a "writer_shed" event when there is room again). The first
// success after failures writes a "storage_recovered" event with the number
// of failed commits, the outage and what was shed meanwhile.
//
// File identity: before each commit the writer compares the path's device and
// inode with those of the file it has open. If the file was deleted
// (unlinked while open), the live data is copied with VACUUM INTO to a fresh
// file, which then takes the path, and writing carries on there. If another
// file was put at the path (renamed over it), that file is left alone: the
// live data is copied to a sibling "<path>.rescued-<UTC>" and writing carries
// on there. Either way the open (now unlinked) file's own -wal/-shm at the
// path are removed, so no one pairs them with the new file, and a
// "database_deleted" or "database_replaced" event names both paths. If the
// copy fails, writing continues into the open file and the rescue is retried
// every full_retry_interval (the data lives only as long as the process then).
//
// Retention: every retention_interval, rows whose time is older than their
// tier's keep time are deleted (raw blocks, series points, each rollup width);
// a keep time of 0 keeps the tier for ever.
#include <chrono>
#include <condition_variable>
#include <cstdint>
#include <deque>
#include <functional>
#include <map>
#include <memory>
#include <mutex>
#include <optional>
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
  // Queue limits (see Overload policy); the daemon sets them from writer_queue_*_limit_mib.
  // 8 MiB of encoded raw blocks is ~5.6 M samples, seconds at 1 M samples/s.
  std::size_t soft_limit_bytes = 8u << 20;
  std::size_t hard_limit_bytes = 256u << 20;
  // WAL management.
  int wal_checkpoint_frames = 1000;                        // about 4 MiB of 4 KiB pages
  std::int64_t journal_size_limit_bytes = 16 << 20;        // WAL file size kept after a restart
  // Retention per tier, seconds; 0 keeps for ever.
  double raw_keep_s = 14 * 86400.0;
  double series_keep_s = 0.0;
  std::map<std::int64_t, double> rollup_keep_s;  // by width_s; missing: for ever
  double retention_interval_s = 60.0;
  // Free-disk floor.
  std::uint64_t disk_floor_bytes = 64u << 20;
  double full_retry_interval_s = 5.0;
  // PRAGMA synchronous on the writer's connection (WAL mode). true (FULL): the
  // WAL is synced at every commit, so a commit the writer counts survives a
  // power cut; false (NORMAL): a power cut may roll back the commits made since
  // the last checkpoint, though never corrupt the file. See docs/reliability.md.
  bool durable_commits = true;
  // A cap on the file's size (PRAGMA max_page_count); 0: none.
  std::uint64_t max_file_bytes = 0;
  // Longest wait between attempts while commits fail (the wait doubles from commit_interval).
  std::chrono::milliseconds max_retry_interval{5000};
  // Compare the path's inode with the open file's before each commit (see File identity).
  bool check_file_identity = true;
};

struct WriterCounters {
  std::uint64_t batches_accepted = 0;
  std::uint64_t commits = 0;
  std::uint64_t commit_failures = 0;
  std::uint64_t raw_blocks_written = 0;
  std::uint64_t raw_blocks_shed = 0;       // queue over soft limit
  std::uint64_t raw_blocks_shed_disk = 0;  // raw writing stopped (floor or full disk)
  std::uint64_t raw_bytes_written = 0;     // encoded BLOB bytes
  std::uint64_t raw_samples_written = 0;   // codes (all channels)
  std::uint64_t series_points_written = 0;
  std::uint64_t series_points_shed = 0;
  std::uint64_t segments_written = 0;
  std::uint64_t events_written = 0;
  std::uint64_t disk_full_errors = 0;
  std::uint64_t raw_stops = 0;
  bool raw_stopped = false;
  std::uint64_t wal_checkpoints = 0;
  int wal_frames = 0;  // after the last checkpoint attempt
  std::uint64_t retention_passes = 0;
  std::uint64_t rows_deleted_by_retention = 0;
  std::size_t queued_bytes = 0;
  std::size_t queued_bytes_peak = 0;  // the most queued_bytes has been since open (benchmarks, status)
  double last_commit_unix = 0.0;
  // Commit latency (BEGIN to COMMIT on the writer thread), for status and benchmarks only.
  double last_commit_ms = 0.0;
  double max_commit_ms = 0.0;
  double sum_commit_ms = 0.0;
  std::string last_error;
  // Failing writes (other than a full disk) and the current outage.
  std::uint64_t write_errors = 0;
  std::uint64_t consecutive_failures = 0;  // 0 while commits succeed
  double failing_since_unix = 0.0;          // 0 while commits succeed
  std::uint64_t retry_delay_ms = 0;         // wait before the next attempt
  std::uint64_t storage_recoveries = 0;
  // File identity (deleted or replaced under the writer) and rescues.
  std::uint64_t file_deleted = 0;
  std::uint64_t file_replaced = 0;
  std::uint64_t file_rescues = 0;
  std::uint64_t file_rescue_failures = 0;
  std::string path;  // the file being written now (differs from the opened path after a replaced rescue)
  std::map<int, std::uint64_t> committed_last_index;  // per channel, from checkpoints
};

class Writer {
 public:
  using Clock = std::function<double()>;                          // Unix seconds; injected for tests
  using FreeBytes = std::function<std::optional<std::uint64_t>()>;  // free space where the file lives
  // Told of storage trouble and recovery (is_error: error or notice), from the writer thread.
  using Notice = std::function<void(bool is_error, const std::string& message)>;

  // Opens (creating if needed) and migrates the file; the thread is not started
  // yet. A file of a newer schema version is refused before anything is written.
  // free_bytes defaults to statvfs() of the file's directory.
  static Status open(const std::string& path, WriterSettings settings, Clock clock, std::unique_ptr<Writer>& out,
                     FreeBytes free_bytes = {});
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
  // Blocks until pred(counters) holds, re-checking after every commit cycle;
  // false if the thread has ended first. For tests and tools: no deadline.
  bool wait_until(const std::function<bool(const WriterCounters&)>& pred);
  // Before start(): where storage trouble is reported besides the counters.
  void set_notice_sink(Notice notice) { notice_ = std::move(notice); }
  // Takes effect before the next commit (tests use it to lift a simulated full disk).
  void set_max_file_bytes(std::uint64_t bytes);

 private:
  Writer(std::unique_ptr<Database> db, std::string path, WriterSettings settings, Clock clock, FreeBytes free_bytes);
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
  Status apply_max_file_bytes(std::uint64_t bytes);
  static Status open_connection(const std::string& path, const WriterSettings& settings, std::unique_ptr<Database>& db);
  Status attach_connection();  // statements, WAL hook and file cap on db_
  // File identity (see the header comment); each runs on the writer thread between commits.
  void check_file_identity(std::deque<Batch>& pending);
  Status rescue(const std::string& target, bool take_path, std::string& written_to);
  void record_file_ids();
  void note(bool is_error, const std::string& message);
  // Counts a failed cycle (backoff, notice) or, on the first success after failures, writes "storage_recovered".
  void track_outage(std::deque<Batch>& pending, Status& s, double now);
  void thread_main();
  void cycle(std::deque<Batch>& pending);
  Status commit(std::deque<Batch>& pending, bool with_raw);
  Status write_batch(const Batch& b, bool with_raw);
  Status write_rollups(const ChannelRows& c);
  Status sample_period(std::int64_t run_id, double& out);
  void writer_event(std::deque<Batch>& pending, std::string kind, std::string detail);
  void manage_wal();
  void apply_retention();

  std::unique_ptr<Database> db_;
  std::string path_;       // the configured path
  std::string open_path_;  // the file written now
  struct FileId {
    bool known = false;
    std::uint64_t dev = 0, ino = 0;
  };
  FileId db_id_, wal_id_, shm_id_;
  double next_rescue_unix_ = 0.0;
  std::uint64_t outage_raw_shed_ = 0, outage_series_shed_ = 0;  // shed counts when the outage began
  Notice notice_;
  WriterSettings settings_;
  Clock clock_;
  FreeBytes free_bytes_;
  struct Statements;
  std::unique_ptr<Statements> st_;

  // Writer-thread state.
  std::map<std::int64_t, double> period_by_run_;
  enum class RawStop { none, floor, full };
  RawStop raw_stop_ = RawStop::none;
  double raw_stop_since_unix_ = 0.0;
  double last_retention_unix_ = 0.0;
  std::uint64_t applied_max_file_bytes_ = 0;
  int wal_frames_ = 0;  // frames in the WAL after the last commit (wal hook)
  std::uint64_t attempt_raw_bytes_ = 0;  // encoded raw bytes in the open transaction
  std::vector<CalibrationRow> calibrations_;  // taken from new_calibrations_, not yet committed

  mutable std::mutex mutex_;
  std::condition_variable wake_;
  std::deque<Batch> queue_;
  std::map<std::pair<int, std::string>, std::int64_t> calibration_ids_;  // (channel, definition) -> id
  std::int64_t next_calibration_id_ = 1;
  std::vector<CalibrationRow> new_calibrations_;
  bool stopping_ = false;
  bool shed_notice_pending_ = false;
  std::uint64_t wanted_max_file_bytes_ = 0;
  bool thread_done_ = false;
  std::condition_variable progress_;  // after every cycle (wait_until)
  WriterCounters counters_;
  std::thread thread_;
};

}  // namespace accrue::storage
