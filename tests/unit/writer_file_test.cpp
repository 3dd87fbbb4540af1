// The writer's file-identity policy: a database file deleted (unlinked while
// open) or replaced (another file renamed over it) under a running writer is
// detected before the next commit, every committed row is rescued with VACUUM
// INTO, and writing carries on in the rescued file with nothing lost.
#include <catch2/catch.hpp>

#include <unistd.h>

#include <cstdio>
#include <filesystem>
#include <mutex>
#include <random>
#include <vector>

#include "writer_batches.hpp"

using namespace accrue;
using namespace accrue::storage;
using namespace accrue::storage::testing;

namespace {

struct Notices {
  std::mutex mutex;
  std::vector<std::string> errors;
  bool contains(const std::string& part) {
    std::lock_guard lock(mutex);
    for (const auto& e : errors)
      if (e.find(part) != std::string::npos) return true;
    return false;
  }
};

std::unique_ptr<Writer> open_writer(const std::string& path, Notices& notices, std::int64_t& calibration_id) {
  WriterSettings settings;
  settings.commit_interval = std::chrono::milliseconds(1);
  std::unique_ptr<Writer> w;
  REQUIRE(Writer::open(path, settings, [] { return kWriterT0; }, w,
                       [] { return std::optional<std::uint64_t>(1ull << 40); })
              .ok());
  w->set_notice_sink([&notices](bool is_error, const std::string& m) {
    std::lock_guard lock(notices.mutex);
    if (is_error) notices.errors.push_back(m);
  });
  chain::Calibration cal;
  REQUIRE(w->ensure_calibration(0, cal).ok());
  calibration_id = cal.id;
  w->start();
  return w;
}

std::vector<std::string> event_details(const std::string& path, const char* kind) {
  auto db = open_read_only(path);
  Statement st;
  REQUIRE(db->prepare(std::string("SELECT detail FROM event WHERE kind = '") + kind + "'", st).ok());
  std::vector<std::string> out;
  for (bool row = true;;) {
    REQUIRE(st.step(&row).ok());
    if (!row) break;
    out.push_back(st.column_text(0));
  }
  return out;
}

// Every batch 0..n-1 is stored exactly once: raw blocks, series points, the checkpoint's total.
void check_holds_all(const std::string& path, std::uint64_t n, std::uint16_t samples) {
  CHECK(integrity(path) == "ok");
  CHECK(scalar(path, "SELECT count(*) FROM raw_block") == double(n));
  CHECK(scalar(path, "SELECT count(DISTINCT first_index) FROM raw_block") == double(n));
  CHECK(scalar(path, "SELECT max(first_index) FROM raw_block") == double((n - 1) * samples));
  CHECK(scalar(path, "SELECT count(*) FROM series_point") == double(n));
  CHECK(scalar(path, "SELECT sum(total) FROM series_point") == double(n * (n + 1) / 2));
  CHECK(scalar(path, "SELECT total FROM total_checkpoint WHERE channel = 0") == double(n));
  CHECK(scalar(path, "SELECT last_index FROM total_checkpoint WHERE channel = 0") == double(n * samples - 1));
}

}  // namespace

TEST_CASE("writer: a database deleted while open is rescued to its path and writing carries on there") {
  // Deleting the file alone (rm accrue.db) leaves the open file's -wal and -shm at the path;
  // deleting all three (rm accrue.db*) does not. Both must end with one good file at the path.
  const bool with_wal = GENERATE(false, true);
  INFO("the -wal and -shm files are deleted too: " << with_wal);
  TempDir dir("rescue");
  const std::string path = dir.file("live.db");
  Notices notices;
  std::int64_t cal = 0;
  auto w = open_writer(path, notices, cal);
  std::mt19937 rng(11);
  const std::uint16_t samples = 200;
  std::uint64_t k = 0;
  for (; k < 40; ++k) w->submit(make_batch(cal, k, samples, rng, k == 0));
  REQUIRE(w->wait_until([&](const WriterCounters& c) { return committed_to(c, k * samples - 1); }));
  REQUIRE(std::filesystem::is_regular_file(path));
  REQUIRE(::unlink(path.c_str()) == 0);
  if (with_wal) {
    (void)::unlink((path + "-wal").c_str());
    (void)::unlink((path + "-shm").c_str());
  }
  for (; k < 80; ++k) w->submit(make_batch(cal, k, samples, rng, false));
  REQUIRE(w->wait_until([&](const WriterCounters& c) { return c.file_rescues == 1 && committed_to(c, k * samples - 1); }));
  // Still the same file after the rescue: nothing is rescued twice.
  for (; k < 100; ++k) w->submit(make_batch(cal, k, samples, rng, false));
  REQUIRE(w->wait_until([&](const WriterCounters& c) { return committed_to(c, k * samples - 1); }));
  w->stop();
  const auto c = w->counters();
  CHECK(c.file_deleted == 1);
  CHECK(c.file_replaced == 0);
  CHECK(c.file_rescues == 1);
  CHECK(c.file_rescue_failures == 0);
  CHECK(c.path == path);
  CHECK(c.raw_blocks_written == 100);
  CHECK(c.last_error.empty());
  check_holds_all(path, 100, samples);
  const auto events = event_details(path, "database_deleted");
  REQUIRE(events.size() == 1);
  CHECK(events[0].find("rescued_to=" + path) != std::string::npos);
  CHECK(notices.contains("was deleted while open"));
  CHECK_FALSE(std::filesystem::exists(path + ".rescue-tmp"));
  // Only the path and its own log files remain: no stray copies.
  int files = 0;
  for (const auto& e : std::filesystem::directory_iterator(dir.path)) {
    const std::string name = e.path().filename().string();
    CHECK((name == "live.db" || name == "live.db-wal" || name == "live.db-shm"));
    ++files;
  }
  CHECK(files >= 1);
}

TEST_CASE("writer: a file renamed over the database is left alone and the live data moves to a rescued sibling") {
  TempDir dir("rescue");
  const std::string path = dir.file("live.db");
  const std::string stranger = dir.file("stranger.db");
  Notices notices;
  std::int64_t cal = 0;
  auto w = open_writer(path, notices, cal);
  std::mt19937 rng(12);
  const std::uint16_t samples = 200;
  std::uint64_t k = 0;
  for (; k < 30; ++k) w->submit(make_batch(cal, k, samples, rng, k == 0));
  REQUIRE(w->wait_until([&](const WriterCounters& c) { return committed_to(c, k * samples - 1); }));
  {
    // Someone else's database (rollback journal, one table, one row) takes the path.
    std::unique_ptr<Database> db;
    REQUIRE(Database::open(stranger, Database::Mode::read_write_create, db).ok());
    REQUIRE(db->exec("CREATE TABLE notes(text TEXT); INSERT INTO notes VALUES('not yours')").ok());
  }
  REQUIRE(std::rename(stranger.c_str(), path.c_str()) == 0);
  for (; k < 60; ++k) w->submit(make_batch(cal, k, samples, rng, false));
  REQUIRE(w->wait_until([&](const WriterCounters& c) { return c.file_rescues == 1 && committed_to(c, k * samples - 1); }));
  w->stop();
  const auto c = w->counters();
  CHECK(c.file_replaced == 1);
  CHECK(c.file_deleted == 0);
  const std::string rescued = c.path;
  INFO("rescued to " << rescued);
  CHECK(rescued.rfind(path + ".rescued-", 0) == 0);
  check_holds_all(rescued, 60, samples);
  const auto events = event_details(rescued, "database_replaced");
  REQUIRE(events.size() == 1);
  CHECK(events[0].find("path=" + path) != std::string::npos);
  CHECK(events[0].find("rescued_to=" + rescued) != std::string::npos);
  CHECK(notices.contains("was replaced by another file"));
  // The stranger's file is untouched, and our old -wal is gone, so nothing pairs it with theirs.
  CHECK_FALSE(std::filesystem::exists(path + "-wal"));
  CHECK(integrity(path) == "ok");
  CHECK(scalar(path, "SELECT count(*) FROM sqlite_master") == 1);
  CHECK(scalar(path, "SELECT count(*) FROM notes") == 1);
}
