#include <catch2/catch.hpp>

#include <filesystem>
#include <thread>

#include "storage/database.hpp"
#include "storage/writer.hpp"

using namespace accrue;

namespace {

std::string temp_db(const char* name) {
  auto dir = std::filesystem::temp_directory_path() / ("accrue-test-" + std::to_string(::getpid()));
  std::filesystem::create_directories(dir);
  auto path = dir / name;
  std::filesystem::remove(path);
  std::filesystem::remove(path.string() + "-wal");
  std::filesystem::remove(path.string() + "-shm");
  return path.string();
}

std::int64_t count(const std::string& path, const char* sql) {
  std::unique_ptr<storage::Database> db;
  REQUIRE(storage::Database::open(path, storage::Database::Mode::read_only, db).ok());
  storage::Statement st;
  REQUIRE(db->prepare(sql, st).ok());
  bool row = false;
  REQUIRE(st.step(&row).ok());
  return row ? st.column_int(0) : -1;
}

}  // namespace

TEST_CASE("writer: calibration versions are assigned without the disk and written before their rows", "[storage][writer]") {
  const std::string path = temp_db("calibration.db");
  auto clock = [] { return 1.8e9; };
  chain::Calibration a, b;
  b.front_end.c_farad = 1.02e-9;  // a corrected capacitor is a new version
  {
    std::unique_ptr<storage::Writer> w;
    REQUIRE(storage::Writer::open(path, {}, clock, w).ok());
    w->start();
    // The ingest thread asks while the writer thread runs: no shared connection use.
    std::thread other([&] { REQUIRE(w->ensure_calibration(0, a).ok()); });
    other.join();
    chain::Calibration a_again;
    REQUIRE(w->ensure_calibration(0, a_again).ok());
    REQUIRE(w->ensure_calibration(0, b).ok());
    CHECK(a.id == a_again.id);
    CHECK(a.id != b.id);

    storage::Batch batch;
    batch.run_start = storage::RunStart{1, {}, 0.0, 1.8e9};
    storage::ChannelRows rows;
    rows.channel = 0;
    rows.run_id = 1;
    rows.calibration_id = b.id;
    rows.output.series.push_back(chain::SeriesPoint{0, 1000, -1, 1, 0, 0.5, 1e-9, 1e-13});
    batch.channels.push_back(rows);
    w->submit(std::move(batch));
    w->stop();
    CHECK(w->counters().commit_failures == 0);
  }
  CHECK(count(path, "SELECT COUNT(*) FROM calibration") == 2);
  CHECK(count(path, "SELECT COUNT(*) FROM series_point p JOIN calibration c USING (calibration_id)") == 1);
  // A restarted writer finds the stored versions instead of adding duplicates.
  std::unique_ptr<storage::Writer> w;
  REQUIRE(storage::Writer::open(path, {}, clock, w).ok());
  chain::Calibration b_again;
  b_again.front_end.c_farad = 1.02e-9;
  REQUIRE(w->ensure_calibration(0, b_again).ok());
  CHECK(b_again.id == b.id);
  w->stop();
  CHECK(count(path, "SELECT COUNT(*) FROM calibration") == 2);
}
