// Raw blocks on disk cost about their encoded size. A block of 1,000 samples
// encodes to about 1.5 KB; in a WITHOUT ROWID table SQLite keeps only about
// 1,000 bytes of a row on a 4 KiB page and gives the rest an overflow page of
// its own (SQLite file format documentation, "B-tree Page Format": the
// maximum local payload of an index b-tree cell is (U-12)*64/255-23 bytes,
// of a table b-tree leaf cell U-35), which made such a block cost 4 KiB more.
#include <catch2/catch.hpp>

#include <unistd.h>

#include <cstdint>
#include <filesystem>
#include <random>
#include <span>
#include <string>
#include <vector>

#include "storage/database.hpp"
#include "storage/migrations.hpp"

using namespace accrue::storage;
namespace fs = std::filesystem;

namespace {
std::int64_t pragma_int(Database& db, const char* sql) {
  Statement st;
  REQUIRE(db.prepare(sql, st).ok());
  bool row = false;
  REQUIRE(st.step(&row).ok());
  REQUIRE(row);
  return st.column_int(0);
}
}  // namespace

TEST_CASE("raw block pages: 1,000-sample blocks take no more than 1.5x their encoded bytes on disk") {
  std::string dir = (fs::temp_directory_path() / "accrue-rawpages-XXXXXX").string();
  REQUIRE(::mkdtemp(dir.data()) != nullptr);
  {
    std::unique_ptr<Database> db;
    REQUIRE(Database::open(dir + "/a.db", Database::Mode::read_write_create, db).ok());
    REQUIRE(migrate(*db).ok());
    REQUIRE(db->exec("INSERT INTO board VALUES(1, 42, 3, 1, 24, 2.5, 0, '2026-12-01T20:00:00Z');"
                     "INSERT INTO run VALUES(1, 1, '2026-12-01T20:00:00Z', 0.001, 1796155200.0, NULL, NULL);")
                .ok());
    const std::int64_t pages_before = pragma_int(*db, "PRAGMA page_count");
    const std::int64_t page_size = pragma_int(*db, "PRAGMA page_size");
    constexpr int kBlocks = 2000;
    constexpr std::size_t kBlockBytes = 1500;  // a 1,000-sample block of the demo scenario, encoding 2
    std::mt19937 rng(7);
    std::vector<std::uint8_t> blob(kBlockBytes);
    REQUIRE(db->exec("BEGIN").ok());
    Statement st;
    REQUIRE(db->prepare("INSERT INTO raw_block(run_id, first_index, channel_count, samples, status, encoding, data)"
                        " VALUES(1, ?, 1, 1000, 0, 2, ?)",
                        st)
                .ok());
    for (int i = 0; i < kBlocks; ++i) {
      for (auto& b : blob) b = std::uint8_t(rng());  // incompressible, like noise
      st.bind(1, std::int64_t(i) * 1000);
      st.bind(2, std::span<const std::uint8_t>(blob));
      bool row = false;
      REQUIRE(st.step(&row).ok());
      REQUIRE(sqlite3_reset(st.raw()) == SQLITE_OK);
    }
    REQUIRE(db->exec("COMMIT").ok());
    const double stored = double(pragma_int(*db, "PRAGMA page_count") - pages_before) * double(page_size);
    const double payload = double(kBlocks) * double(kBlockBytes);
    INFO("pages added " << stored << " bytes for " << payload << " bytes of blocks");
    CHECK(stored <= 1.5 * payload);
  }
  fs::remove_all(dir);
}
