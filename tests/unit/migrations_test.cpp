// Schema versioning: migrations from an empty file and from every earlier
// version give the documented layout (storage/schema.sql); a newer file is
// refused and left byte-for-byte unchanged.
#include <catch2/catch.hpp>

#include <sys/stat.h>
#include <unistd.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <map>
#include <sstream>
#include <string>

#include "storage/database.hpp"
#include "storage/migrations.hpp"
#include "storage/schema_sql.hpp"
#include "storage/writer.hpp"

using namespace accrue::storage;
namespace fs = std::filesystem;

namespace {

struct TempDir {
  fs::path path;
  TempDir() {
    std::string t = (fs::temp_directory_path() / "accrue-migrations-XXXXXX").string();
    REQUIRE(::mkdtemp(t.data()) != nullptr);
    path = t;
  }
  ~TempDir() { fs::remove_all(path); }
};

std::unique_ptr<Database> open_db(const fs::path& p) {
  std::unique_ptr<Database> db;
  REQUIRE(Database::open(p.string(), Database::Mode::read_write_create, db).ok());
  return db;
}

std::vector<std::vector<std::string>> rows(Database& db, const std::string& sql) {
  Statement st;
  const Status s = db.prepare(sql, st);
  INFO(s.message);
  REQUIRE(s.ok());
  std::vector<std::vector<std::string>> out;
  for (bool row = true;;) {
    REQUIRE(st.step(&row).ok());
    if (!row) break;
    std::vector<std::string> r;
    for (int c = 0; c < sqlite3_column_count(st.raw()); ++c) r.push_back(st.column_text(c));
    out.push_back(r);
  }
  return out;
}

// Every table's and view's columns (name, declared type, not null, key
// position) and every index: the layout, independent of comments and of the
// order the statements ran in.
std::map<std::string, std::vector<std::vector<std::string>>> layout(Database& db) {
  std::map<std::string, std::vector<std::vector<std::string>>> out;
  for (const auto& obj : rows(db, "SELECT type, name FROM sqlite_schema WHERE name NOT LIKE 'sqlite_%' ORDER BY name")) {
    auto cols = rows(db, "SELECT name, type, \"notnull\", pk FROM pragma_table_info('" + obj[1] + "')");
    if (obj[0] == "index") cols = rows(db, "SELECT name FROM pragma_index_info('" + obj[1] + "')");
    out[obj[0] + " " + obj[1]] = cols;
  }
  return out;
}

int user_version(Database& db) { return std::stoi(rows(db, "PRAGMA user_version")[0][0]); }

std::string file_bytes(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), {});
}

}  // namespace

TEST_CASE("migrations: an empty file migrates to exactly the layout documented in schema.sql") {
  TempDir dir;
  auto migrated = open_db(dir.path / "migrated.db");
  REQUIRE(migrate(*migrated).ok());
  CHECK(user_version(*migrated) == kSchemaVersion);
  auto documented = open_db(dir.path / "documented.db");
  REQUIRE(documented->exec(kSchemaSql).ok());
  const auto want = layout(*documented);
  CHECK(want.count("table rollup") == 1);
  CHECK(want.count("view rollup_utc") == 1);
  CHECK(layout(*migrated) == want);
  // Migrating again is a no-op.
  REQUIRE(migrate(*migrated).ok());
  CHECK(user_version(*migrated) == kSchemaVersion);
}

TEST_CASE("migrations: every earlier version, version 1 with data in it, migrates and keeps its rows") {
  for (int from = 0; from < kSchemaVersion; ++from) {
    INFO("from version " << from);
    TempDir dir;
    auto db = open_db(dir.path / "old.db");
    REQUIRE(migrate_to(*db, from).ok());
    CHECK(user_version(*db) == from);
    if (from >= 1) {
      // Rows in the version 1 layout, as the walking skeleton wrote them.
      REQUIRE(db->exec("INSERT INTO board VALUES(1, 42, 3, 1, 24, 2.5, 0, '2026-12-01T20:00:00Z');"
                       "INSERT INTO run VALUES(1, 1, '2026-12-01T20:00:00Z', 0.001, 1796155200.0, NULL, NULL);"
                       "INSERT INTO calibration VALUES(1, 0, '2026-12-01T20:00:00Z', 'charge', 'C', -1e-9, '{}');"
                       "INSERT INTO raw_block VALUES(1, 0, 1, 3, 0, 1, x'010000020000030000');"
                       "INSERT INTO series_point VALUES(1, 0, 0, 1000, -0.1, 0.2, 0.05, 0.2, 1e-12, 1e-15, 1);")
                  .ok());
    }
    REQUIRE(migrate(*db).ok());
    CHECK(user_version(*db) == kSchemaVersion);
    auto documented = open_db(dir.path / "documented.db");
    REQUIRE(documented->exec(kSchemaSql).ok());
    CHECK(layout(*db) == layout(*documented));
    if (from >= 1) {
      CHECK(rows(*db, "SELECT count(*) FROM series_point")[0][0] == "1");
      CHECK(rows(*db, "SELECT encoding, hex(data) FROM raw_block")[0] ==
            std::vector<std::string>{"1", "010000020000030000"});
      // The new views work on old rows.
      CHECK(rows(*db, "SELECT utc, unit FROM series_utc")[0] ==
            std::vector<std::string>{"2026-12-01T20:00:00.000Z", "C"});
      CHECK(rows(*db, "SELECT bytes FROM raw_block_utc")[0][0] == "9");
    }
  }
}

TEST_CASE("migrations: a failing migration leaves the file at its old version") {
  TempDir dir;
  auto db = open_db(dir.path / "clash.db");
  REQUIRE(migrate_to(*db, 1).ok());
  // Something already named like a table migration 2 creates: the migration fails.
  REQUIRE(db->exec("CREATE TABLE rollup(x)").ok());
  const Status s = migrate(*db);
  CHECK_FALSE(s.ok());
  CHECK(s.message.find("0002") != std::string::npos);
  CHECK(user_version(*db) == 1);
  CHECK(rows(*db, "SELECT count(*) FROM sqlite_schema WHERE name = 'rollup_utc'")[0][0] == "0");
}

TEST_CASE("migrations: a file from a newer accrued is refused with a clear message and not changed") {
  TempDir dir;
  const fs::path p = dir.path / "newer.db";
  {
    auto db = open_db(p);
    REQUIRE(db->exec("CREATE TABLE future(x); INSERT INTO future VALUES(1); PRAGMA user_version = 99").ok());
  }
  const std::string before = file_bytes(p);
  std::unique_ptr<Writer> w;
  const Status s = Writer::open(p.string(), WriterSettings{}, [] { return 0.0; }, w);
  CHECK_FALSE(s.ok());
  CHECK(s.message.find("version 99") != std::string::npos);
  CHECK(s.message.find("newer") != std::string::npos);
  CHECK(w == nullptr);
  CHECK(file_bytes(p) == before);
  CHECK_FALSE(fs::exists(p.string() + "-wal"));  // not even switched to WAL mode
}
