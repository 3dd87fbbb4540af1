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
#include "storage_fixture.hpp"

using namespace accrue;
using namespace accrue::storage;
using namespace accrue::storage::testing;

namespace {

constexpr double kT0 = 1.8e9;

// One batch: a raw block of incompressible codes, one series point, a checkpoint.
Batch make_batch(std::int64_t calibration_id, std::uint64_t k, std::uint16_t samples, std::mt19937& rng,
                 bool first) {
  Batch b;
  if (first) b.run_start = run_start(1, 1e-3, kT0);
  RawBlockRow raw;
  raw.run_id = 1;
  raw.first_index = k * samples;
  raw.samples = samples;
  for (int i = 0; i < samples; ++i) raw.codes.push_back(std::int32_t(rng() % (1u << 24)) - (1 << 23));
  b.raw.push_back(std::move(raw));
  ChannelRows rows;
  rows.channel = 0;
  rows.run_id = 1;
  rows.calibration_id = calibration_id;
  rows.output.series.push_back(chain::SeriesPoint{k * samples, samples, -1, 1, 0, 0.5, double(k + 1), 0.1});
  chain::TotalSnapshot t;
  t.last_index = k * samples + samples - 1;
  t.total = double(k + 1);
  t.state.last_index = t.last_index;
  rows.checkpoint = t;
  b.channels.push_back(std::move(rows));
  return b;
}

// Waits for a state of the writer thread (not a timing check: the deadline only stops a hung test).
template <class Pred>
bool eventually(Pred pred) {
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(20);
  while (std::chrono::steady_clock::now() < deadline) {
    if (pred()) return true;
    std::this_thread::sleep_for(std::chrono::milliseconds(2));
  }
  return pred();
}

double count_events(const std::string& path, const char* kind) {
  return scalar(path, std::string("SELECT count(*) FROM event WHERE kind = '") + kind + "'");
}

}  // namespace

TEST_CASE("writer: a full file stops raw writing first, raises the event, and recovers") {
  TempDir dir("disk");
  const std::string path = dir.file("full.db");
  std::atomic<double> now{kT0};
  WriterSettings settings;
  settings.commit_interval = std::chrono::milliseconds(1);
  settings.full_retry_interval_s = 1.0;
  settings.max_file_bytes = 400 * 1024;
  std::unique_ptr<Writer> w;
  REQUIRE(Writer::open(path, settings, [&] { return now.load(); }, w,
                       [] { return std::optional<std::uint64_t>(1ull << 40); })
              .ok());
  chain::Calibration cal;
  REQUIRE(w->ensure_calibration(0, cal).ok());
  w->start();
  std::mt19937 rng(1);
  std::uint64_t k = 0;
  // Fill until the cap stops raw writing (each block is about 3.5 KiB encoded).
  for (; k < 2000 && !w->counters().raw_stopped; ++k) {
    w->submit(make_batch(cal.id, k, 1000, rng, k == 0));
    std::this_thread::sleep_for(std::chrono::milliseconds(1));
  }
  REQUIRE(eventually([&] { return w->counters().raw_stopped; }));
  CHECK(w->counters().disk_full_errors >= 1);
  // Derived rows and checkpoints carry on without raw blocks.
  const std::uint64_t shed_before = w->counters().raw_blocks_shed_disk;
  for (int i = 0; i < 20; ++i, ++k) w->submit(make_batch(cal.id, k, 1000, rng, false));
  REQUIRE(eventually([&] { return w->counters().committed_last_index[0] == k * 1000 - 1; }));
  CHECK(w->counters().raw_blocks_shed_disk >= shed_before + 20);
  // Space returns: the next probe (after full_retry_interval) writes raw again.
  w->set_max_file_bytes(0);
  now = kT0 + 10;
  for (int i = 0; i < 5; ++i, ++k) w->submit(make_batch(cal.id, k, 1000, rng, false));
  REQUIRE(eventually([&] { return !w->counters().raw_stopped && w->counters().committed_last_index[0] == k * 1000 - 1; }));
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
  auto db = open_read_only(path);
  Statement st;
  REQUIRE(db->prepare("PRAGMA integrity_check", st).ok());
  bool row = false;
  REQUIRE(st.step(&row).ok());
  CHECK(st.column_text(0) == "ok");
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
    REQUIRE(eventually([&] { return w->counters().committed_last_index[0] == k * 200 - 1; }));
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
      REQUIRE(eventually([&] { return w->counters().committed_last_index[0] == k * 10000 + 9999; }));
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
  REQUIRE(eventually([&] { return w->counters().committed_last_index[0] == 120 * 1000 - 1; }));
  CHECK(scalar(path, "SELECT count(*) FROM raw_block") == 120);
  now = kT0 + 120;  // the newest data is now 0..1 s old, the oldest 120 s
  w->submit(make_batch(cal.id, 120, 1000, rng, false));
  REQUIRE(eventually([&] { return w->counters().retention_passes >= 2 && w->counters().commits >= 2; }));
  w->stop();
  // Kept: blocks ending at or after now - keep.
  CHECK(scalar(path, "SELECT min(first_index) FROM raw_block") == 90 * 1000);
  CHECK(scalar(path, "SELECT count(*) FROM raw_block") == 31);
  CHECK(scalar(path, "SELECT min(first_index) FROM series_point") == 60 * 1000);
  CHECK(scalar(path, "SELECT min(first_index) FROM rollup WHERE width_s = 10") == 30 * 1000);
  CHECK(scalar(path, "SELECT min(first_index) FROM rollup WHERE width_s = 60") == 0);  // kept for ever
  CHECK(scalar(path, "SELECT count(*) FROM total_checkpoint") == 1);
}
