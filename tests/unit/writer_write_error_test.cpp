// The writer under failing storage (a read-only remount, I/O errors, a full
// disk), through the FailingVfs shim: the queue is kept, attempts back off,
// failures are counted and reported, shedding happens only at the queue's
// limits, and once writes work again everything kept is written, with a
// "storage_recovered" event.
#include <catch2/catch.hpp>

#include <mutex>
#include <random>
#include <vector>

#include "helpers/failing_vfs.hpp"
#include "writer_batches.hpp"

using namespace accrue;
using namespace accrue::storage;
using namespace accrue::storage::testing;

namespace {

struct Rig {
  TempDir dir{"writefail"};
  std::string path = dir.file("w.db");
  std::mutex mutex;
  std::vector<std::string> errors, notices;
  std::unique_ptr<Writer> w;
  std::int64_t cal = 0;
  explicit Rig(WriterSettings settings, std::function<double()> clock = [] { return kWriterT0; }) {
    REQUIRE(Writer::open(path, settings, std::move(clock), w, [] { return std::optional<std::uint64_t>(1ull << 40); })
                .ok());
    w->set_notice_sink([this](bool is_error, const std::string& m) {
      std::lock_guard lock(mutex);
      (is_error ? errors : notices).push_back(m);
    });
    chain::Calibration c;
    REQUIRE(w->ensure_calibration(0, c).ok());
    cal = c.id;
    w->start();
  }
};

WriterSettings fast_settings() {
  WriterSettings s;
  s.commit_interval = std::chrono::milliseconds(1);
  s.max_retry_interval = std::chrono::milliseconds(8);
  return s;
}

std::string detail_of(const std::string& path, const char* kind) {
  auto db = open_read_only(path);
  Statement st;
  REQUIRE(db->prepare(std::string("SELECT detail FROM event WHERE kind = '") + kind + "'", st).ok());
  bool row = false;
  REQUIRE(st.step(&row).ok());
  return row ? st.column_text(0) : std::string();
}

}  // namespace

TEST_CASE("writer: while writes fail the queue is kept and retried with backoff, and nothing is lost after") {
  // SQLITE_IOERR_WRITE is what a read-only remount (EROFS) or a failing disk (EIO) gives.
  const int code = GENERATE(SQLITE_IOERR_WRITE, SQLITE_READONLY);
  INFO("refused with SQLite code " << code);
  accrue::testing::FailingVfs vfs;
  Rig rig(fast_settings());
  std::mt19937 rng(21);
  const std::uint16_t samples = 200;
  std::uint64_t k = 0;
  for (; k < 10; ++k) rig.w->submit(make_batch(rig.cal, k, samples, rng, k == 0));
  REQUIRE(rig.w->wait_until([&](const WriterCounters& c) { return committed_to(c, k * samples - 1); }));
  vfs.fail_from_now(code);
  for (; k < 30; ++k) rig.w->submit(make_batch(rig.cal, k, samples, rng, false));
  // Five failures in a row: the wait has doubled 1, 2, 4, 8 ms and stays at the 8 ms cap.
  REQUIRE(rig.w->wait_until([](const WriterCounters& c) { return c.consecutive_failures >= 5; }));
  auto c = rig.w->counters();
  CHECK(committed_to(c, 10 * samples - 1));  // nothing new committed while failing
  CHECK(c.write_errors >= 5);
  CHECK(c.retry_delay_ms == 8);
  CHECK(c.failing_since_unix == kWriterT0);
  CHECK(c.queued_bytes > 0);
  CHECK(c.raw_blocks_shed == 0);
  CHECK(c.series_points_shed == 0);
  CHECK(vfs.refused() >= 5);
  {
    std::lock_guard lock(rig.mutex);
    REQUIRE_FALSE(rig.errors.empty());
    CHECK(rig.errors[0].find("database writes are failing (1 in a row)") != std::string::npos);
    // Said at failures 1, 2, 4, 8, ...: far fewer lines than failures.
    CHECK(rig.errors.size() < c.consecutive_failures);
  }
  vfs.heal();
  REQUIRE(rig.w->wait_until([&](const WriterCounters& c2) { return committed_to(c2, k * samples - 1); }));
  for (; k < 35; ++k) rig.w->submit(make_batch(rig.cal, k, samples, rng, false));
  rig.w->stop();
  c = rig.w->counters();
  CHECK(c.consecutive_failures == 0);
  CHECK(c.retry_delay_ms == 0);
  CHECK(c.storage_recoveries == 1);
  CHECK(c.raw_blocks_written == 35);
  CHECK(integrity(rig.path) == "ok");
  CHECK(scalar(rig.path, "SELECT count(*) FROM raw_block") == 35);
  CHECK(scalar(rig.path, "SELECT count(*) FROM series_point") == 35);
  CHECK(scalar(rig.path, "SELECT total FROM total_checkpoint WHERE channel = 0") == 35);
  const std::string detail = detail_of(rig.path, "storage_recovered");
  CHECK(detail.find("failed_commits=" + std::to_string(c.write_errors)) == 0);
  CHECK(detail.find("raw_blocks_shed=0 series_points_shed=0") != std::string::npos);
  std::lock_guard lock(rig.mutex);
  REQUIRE(rig.notices.size() == 1);
  CHECK(rig.notices[0].find("database writes work again") == 0);
}

TEST_CASE("writer: a long outage sheds raw blocks only at the queue's limit, counted, and says so after") {
  accrue::testing::FailingVfs vfs;
  WriterSettings settings = fast_settings();
  const std::uint16_t samples = 200;
  std::mt19937 rng(22);
  std::mt19937 probe_rng(rng);
  const std::size_t raw_bytes = make_batch(0, 0, samples, probe_rng, false).raw_bytes();  // one encoded block
  settings.soft_limit_bytes = 20 * raw_bytes;
  settings.hard_limit_bytes = 1u << 20;
  Rig rig(settings);
  std::uint64_t k = 0;
  rig.w->submit(make_batch(rig.cal, k++, samples, rng, true));
  REQUIRE(rig.w->wait_until([&](const WriterCounters& c) { return committed_to(c, k * samples - 1); }));
  vfs.fail_from_now(SQLITE_IOERR_WRITE);
  for (; k < 61; ++k) rig.w->submit(make_batch(rig.cal, k, samples, rng, false));
  REQUIRE(rig.w->wait_until([](const WriterCounters& c) { return c.consecutive_failures >= 3; }));
  const auto during = rig.w->counters();
  INFO("shed " << during.raw_blocks_shed << " of 60 raw blocks while failing");
  // The queue (raw and derived bytes) reaches the soft limit before 20 raw blocks are held;
  // every block after that is shed, never a series point.
  CHECK(during.raw_blocks_shed > 40);
  CHECK(during.raw_blocks_shed < 60);
  CHECK(during.series_points_shed == 0);
  vfs.heal();
  REQUIRE(rig.w->wait_until([&](const WriterCounters& c) { return committed_to(c, k * samples - 1); }));
  // The "writer_shed" notice rides on the next batch once the queue has room.
  rig.w->submit(make_batch(rig.cal, k++, samples, rng, false));
  rig.w->stop();
  const auto c = rig.w->counters();
  CHECK(c.raw_blocks_shed == during.raw_blocks_shed);
  CHECK(c.raw_blocks_written + c.raw_blocks_shed == k);
  CHECK(scalar(rig.path, "SELECT count(*) FROM raw_block") == double(c.raw_blocks_written));
  CHECK(scalar(rig.path, "SELECT count(*) FROM series_point") == double(k));  // no derived row lost
  CHECK(integrity(rig.path) == "ok");
  CHECK(detail_of(rig.path, "storage_recovered").find("raw_blocks_shed=" + std::to_string(c.raw_blocks_shed)) !=
        std::string::npos);
  CHECK(detail_of(rig.path, "writer_shed") ==
        "raw_blocks_shed=" + std::to_string(c.raw_blocks_shed) + " series_points_shed=0");
}

TEST_CASE("writer: a disk that refuses every write as full keeps derived rows queued and writes them when space returns") {
  accrue::testing::FailingVfs vfs;
  std::atomic<double> now{kWriterT0};
  WriterSettings settings = fast_settings();
  settings.full_retry_interval_s = 1.0;
  Rig rig(settings, [&] { return now.load(); });
  std::mt19937 rng(23);
  const std::uint16_t samples = 200;
  std::uint64_t k = 0;
  for (; k < 5; ++k) rig.w->submit(make_batch(rig.cal, k, samples, rng, k == 0));
  REQUIRE(rig.w->wait_until([&](const WriterCounters& c) { return committed_to(c, k * samples - 1); }));
  vfs.fail_from_now(SQLITE_FULL);
  for (; k < 25; ++k) rig.w->submit(make_batch(rig.cal, k, samples, rng, false));
  // Raw writing stops first; then the derived rows do not fit either, so they wait.
  REQUIRE(rig.w->wait_until([](const WriterCounters& c) { return c.raw_stopped && c.consecutive_failures >= 3 && c.raw_blocks_shed_disk == 20;
  }));
  auto c = rig.w->counters();
  CHECK(committed_to(c, 5 * samples - 1));
  CHECK(c.disk_full_errors >= 3);
  CHECK(c.write_errors == 0);  // full is counted as full, not as a write error
  CHECK(c.raw_blocks_shed_disk == 20);
  vfs.heal();
  REQUIRE(rig.w->wait_until([&](const WriterCounters& c2) { return committed_to(c2, k * samples - 1); }));
  // Raw writing resumes at the next probe, one retry interval later.
  now = kWriterT0 + 2;
  for (; k < 30; ++k) rig.w->submit(make_batch(rig.cal, k, samples, rng, false));
  REQUIRE(rig.w->wait_until([&](const WriterCounters& c2) { return !c2.raw_stopped && committed_to(c2, k * samples - 1); }));
  rig.w->stop();
  c = rig.w->counters();
  CHECK(c.storage_recoveries == 1);
  CHECK(c.raw_blocks_written + c.raw_blocks_shed_disk == 30);
  CHECK(c.raw_blocks_written >= 10);
  CHECK(scalar(rig.path, "SELECT count(*) FROM series_point") == 30);
  CHECK(scalar(rig.path, "SELECT total FROM total_checkpoint WHERE channel = 0") == 30);
  CHECK(scalar(rig.path, "SELECT count(*) FROM event WHERE kind = 'raw_writing_stopped'") == 1);
  CHECK(scalar(rig.path, "SELECT count(*) FROM event WHERE kind = 'raw_writing_resumed'") == 1);
  CHECK(integrity(rig.path) == "ok");
}
