// The writer's disk policy: a full file (PRAGMA max_page_count) or a free-disk
// floor stops raw writing first with an event and recovers; the WAL stays
// bounded; retention deletes per tier.
#include <catch2/catch.hpp>

#include <atomic>
#include <chrono>
#include <filesystem>
#include <random>
#include <thread>

#include "storage/reader.hpp"
#include "writer_batches.hpp"

using namespace accrue;
using namespace accrue::storage;
using namespace accrue::storage::testing;

namespace {

constexpr double kT0 = kWriterT0;

// Waits for a state of the writer thread, re-checked after each of its cycles (no deadline:
// ctest's timeout stops a hung test, and a slow machine only makes the wait longer).
bool eventually(Writer& w, const std::function<bool(const WriterCounters&)>& pred) { return w.wait_until(pred); }

double count_events(const std::string& path, const char* kind) {
  return scalar(path, std::string("SELECT count(*) FROM event WHERE kind = '") + kind + "'");
}

}  // namespace

TEST_CASE("writer: a full file stops raw writing first, raises the event, and recovers") {
  // Deterministic whatever the machine's speed: batches go in one at a time, each waited for,
  // until the cap stops raw writing; then the cap is raised by a fixed 64 KiB that raw blocks
  // cannot use (raw stays stopped until a probe, which needs the injected clock to move), so
  // the derived rows that follow always fit, however close to the cap the raw blocks came.
  TempDir dir("disk");
  const std::string path = dir.file("full.db");
  std::atomic<double> now{kT0};
  WriterSettings settings;
  settings.commit_interval = std::chrono::milliseconds(1);
  settings.max_retry_interval = std::chrono::milliseconds(8);
  settings.full_retry_interval_s = 1.0;
  const std::uint64_t cap = 400 * 1024;
  settings.max_file_bytes = cap;
  std::unique_ptr<Writer> w;
  REQUIRE(Writer::open(path, settings, [&] { return now.load(); }, w,
                       [] { return std::optional<std::uint64_t>(1ull << 40); })
              .ok());
  chain::Calibration cal;
  REQUIRE(w->ensure_calibration(0, cal).ok());
  w->start();
  std::mt19937 rng(1);
  std::uint64_t k = 0;
  // Fill until the cap stops raw writing (each block is about 3.5 KiB encoded, so ~110 fit).
  bool stopped = false;
  for (; k < 2000 && !stopped; ++k) {
    w->submit(make_batch(cal.id, k, 1000, rng, k == 0));
    const std::uint64_t last = k * 1000 + 999;
    // Either this batch is committed (with its raw block, or without it once raw stopped),
    // or raw stopped and its derived rows wait for room.
    REQUIRE(eventually(*w, [&](const WriterCounters& c) {
      return committed_to(c, last) || (c.raw_stopped && c.consecutive_failures > 0);
    }));
    stopped = w->counters().raw_stopped;
  }
  REQUIRE(stopped);
  CHECK(w->counters().disk_full_errors >= 1);
  CHECK(w->counters().raw_blocks_written > 50);
  w->set_max_file_bytes(cap + 64 * 1024);
  // Derived rows and checkpoints carry on without raw blocks.
  const std::uint64_t shed_before = w->counters().raw_blocks_shed_disk;
  for (int i = 0; i < 20; ++i, ++k) w->submit(make_batch(cal.id, k, 1000, rng, false));
  REQUIRE(eventually(*w, [&](const WriterCounters& c) { return committed_to(c, k * 1000 - 1); }));
  CHECK(w->counters().raw_stopped);
  CHECK(w->counters().raw_blocks_shed_disk == shed_before + 20);
  // Space returns: the next probe (after full_retry_interval) writes raw again.
  w->set_max_file_bytes(0);
  now = kT0 + 10;
  for (int i = 0; i < 5; ++i, ++k) w->submit(make_batch(cal.id, k, 1000, rng, false));
  REQUIRE(eventually(*w, [&](const WriterCounters& c) { return !c.raw_stopped && committed_to(c, k * 1000 - 1); }));
  const std::uint64_t raw_written = w->counters().raw_blocks_written;
  for (int i = 0; i < 5; ++i, ++k) w->submit(make_batch(cal.id, k, 1000, rng, false));
  w->stop();
  const auto c = w->counters();
  CHECK(c.raw_blocks_written == raw_written + 5);
  CHECK(c.raw_blocks_written + c.raw_blocks_shed_disk + c.raw_blocks_shed == k);
  CHECK(count_events(path, "raw_writing_stopped") == 1);
  CHECK(count_events(path, "raw_writing_resumed") == 1);
  CHECK(scalar(path, "SELECT count(*) FROM series_point") == double(k));  // no derived row lost
  CHECK(scalar(path, "SELECT total FROM total_checkpoint WHERE channel = 0") == double(k));
  CHECK(scalar(path, "SELECT count(*) FROM raw_block") == double(c.raw_blocks_written));
  CHECK(integrity(path) == "ok");
}

TEST_CASE("writer: below the free-disk floor raw blocks are shed with an event until space returns") {
  TempDir dir("disk");
  const std::string path = dir.file("floor.db");
  std::atomic<std::uint64_t> free_bytes{1ull << 30};
  WriterSettings settings;
  settings.commit_interval = std::chrono::milliseconds(1);
  settings.disk_floor_bytes = 100u << 20;
  std::unique_ptr<Writer> w;
  REQUIRE(Writer::open(path, settings, [] { return kT0; }, w,
                       [&] { return std::optional<std::uint64_t>(free_bytes.load()); })
              .ok());
  chain::Calibration cal;
  REQUIRE(w->ensure_calibration(0, cal).ok());
  w->start();
  std::mt19937 rng(2);
  std::uint64_t k = 0;
  const auto submit_and_wait = [&](int n) {
    for (int i = 0; i < n; ++i, ++k) w->submit(make_batch(cal.id, k, 200, rng, k == 0));
    REQUIRE(eventually(*w, [&](const WriterCounters& c) { return committed_to(c, k * 200 - 1); }));
  };
  submit_and_wait(5);
  CHECK(w->counters().raw_blocks_written == 5);
  free_bytes = 50u << 20;
  submit_and_wait(5);
  CHECK(w->counters().raw_stopped);
  CHECK(w->counters().raw_blocks_shed_disk == 5);
  // Just above the floor is not enough (hysteresis of a tenth).
  free_bytes = 105u << 20;
  submit_and_wait(3);
  CHECK(w->counters().raw_blocks_shed_disk == 8);
  free_bytes = 200u << 20;
  submit_and_wait(4);
  w->stop();
  CHECK_FALSE(w->counters().raw_stopped);
  CHECK(w->counters().raw_blocks_written == 9);
  CHECK(count_events(path, "raw_writing_stopped") == 1);
  CHECK(count_events(path, "raw_writing_resumed") == 1);
  CHECK(scalar(path, "SELECT count(*) FROM series_point") == double(k));
}

TEST_CASE("writer: the WAL file stays bounded while a reader keeps reading") {
  TempDir dir("wal");
  const std::string path = dir.file("wal.db");
  WriterSettings settings;
  settings.commit_interval = std::chrono::milliseconds(1);
  settings.wal_checkpoint_frames = 100;
  settings.journal_size_limit_bytes = 1 << 20;
  std::unique_ptr<Writer> w;
  REQUIRE(Writer::open(path, settings, [] { return kT0; }, w, [] { return std::optional<std::uint64_t>(1ull << 40); })
              .ok());
  chain::Calibration cal;
  REQUIRE(w->ensure_calibration(0, cal).ok());
  w->start();
  std::unique_ptr<Reader> reader;
  std::mt19937 rng(3);
  std::uintmax_t max_wal = 0;
  const std::uint64_t batches = 600;  // about 20 MiB of raw blocks
  for (std::uint64_t k = 0; k < batches; ++k) {
    w->submit(make_batch(cal.id, k, 10000, rng, k == 0));
    if (k % 20 == 19) {
      REQUIRE(eventually(*w, [&](const WriterCounters& c) { return committed_to(c, k * 10000 + 9999); }));
      if (!reader) REQUIRE(Reader::open(path, reader).ok());
      std::vector<CheckpointRow> rows;
      REQUIRE(reader->checkpoints(rows).ok());
      CHECK(rows.at(0).last_index == k * 10000 + 9999);
    }
    std::error_code ec;
    max_wal = std::max(max_wal, std::filesystem::file_size(path + "-wal", ec));
  }
  w->stop();
  const auto c = w->counters();
  INFO("largest WAL seen: " << max_wal << " bytes; checkpoints " << c.wal_checkpoints);
  CHECK(c.raw_bytes_written > 15u << 20);
  CHECK(c.wal_checkpoints > 10);
  // A checkpoint is due every 100 frames (400 KiB) and one commit adds at most a
  // few batches; without the checkpoints the WAL would hold all 20 MiB.
  CHECK(max_wal < 4u << 20);
}

TEST_CASE("writer: retention deletes each tier's rows older than its keep time and keeps the rest") {
  TempDir dir("retention");
  const std::string path = dir.file("keep.db");
  std::atomic<double> now{kT0};
  WriterSettings settings;
  settings.commit_interval = std::chrono::milliseconds(1);
  settings.retention_interval_s = 0;
  settings.raw_keep_s = 30;     // raw: 30 s
  settings.series_keep_s = 60;  // series points: 60 s
  settings.rollup_keep_s[10] = 90;
  std::unique_ptr<Writer> w;
  REQUIRE(Writer::open(path, settings, [&] { return now.load(); }, w,
                       [] { return std::optional<std::uint64_t>(1ull << 40); })
              .ok());
  chain::Calibration cal;
  REQUIRE(w->ensure_calibration(0, cal).ok());
  w->start();
  std::mt19937 rng(4);
  // 120 one-second blocks (1000 samples at 1 ms), indices from the run's start.
  for (std::uint64_t k = 0; k < 120; ++k) w->submit(make_batch(cal.id, k, 1000, rng, k == 0));
  REQUIRE(eventually(*w, [&](const WriterCounters& c) { return committed_to(c, 120 * 1000 - 1); }));
  CHECK(scalar(path, "SELECT count(*) FROM raw_block") == 120);
  now = kT0 + 120;  // the newest data is now 0..1 s old, the oldest 120 s
  w->submit(make_batch(cal.id, 120, 1000, rng, false));
  REQUIRE(eventually(*w, [&](const WriterCounters& c) { return c.retention_passes >= 2 && c.commits >= 2; }));
  w->stop();
  // Kept: blocks ending at or after now - keep.
  CHECK(scalar(path, "SELECT min(first_index) FROM raw_block") == 90 * 1000);
  CHECK(scalar(path, "SELECT count(*) FROM raw_block") == 31);
  CHECK(scalar(path, "SELECT min(first_index) FROM series_point") == 60 * 1000);
  CHECK(scalar(path, "SELECT min(first_index) FROM rollup WHERE width_s = 10") == 30 * 1000);
  CHECK(scalar(path, "SELECT min(first_index) FROM rollup WHERE width_s = 60") == 0);  // kept for ever
  CHECK(scalar(path, "SELECT count(*) FROM total_checkpoint") == 1);
}
