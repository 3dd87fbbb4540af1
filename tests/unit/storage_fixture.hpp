#pragma once
// Helpers shared by the storage tests: a unique temporary directory, a writer
// with injected clock and free space, synthetic batches, and SQL probes.
#include <catch2/catch.hpp>

#include <unistd.h>

#include <cstdlib>
#include <filesystem>
#include <memory>
#include <string>
#include <vector>

#include "storage/database.hpp"
#include "storage/writer.hpp"

namespace accrue::storage::testing {

struct TempDir {
  std::filesystem::path path;
  explicit TempDir(const char* tag = "storage") {
    std::string t = (std::filesystem::temp_directory_path() / (std::string("accrue-") + tag + "-XXXXXX")).string();
    REQUIRE(::mkdtemp(t.data()) != nullptr);
    path = t;
  }
  ~TempDir() { std::filesystem::remove_all(path); }
  std::string file(const char* name) const { return (path / name).string(); }
};

inline std::unique_ptr<Database> open_read_only(const std::string& path) {
  std::unique_ptr<Database> db;
  REQUIRE(Database::open(path, Database::Mode::read_only, db).ok());
  return db;
}

inline std::vector<std::vector<double>> query(Database& db, const std::string& sql) {
  Statement st;
  const Status s = db.prepare(sql, st);
  INFO(s.message);
  REQUIRE(s.ok());
  std::vector<std::vector<double>> out;
  for (bool row = true;;) {
    REQUIRE(st.step(&row).ok());
    if (!row) break;
    std::vector<double> r;
    for (int c = 0; c < sqlite3_column_count(st.raw()); ++c) r.push_back(st.column_double(c));
    out.push_back(r);
  }
  return out;
}

inline double scalar(const std::string& path, const std::string& sql) {
  auto db = open_read_only(path);
  auto rows = query(*db, sql);
  REQUIRE(rows.size() == 1);
  return rows[0].at(0);
}

inline RunStart run_start(std::int64_t run_id, double sample_period_s, double utc_at_index0) {
  RunStart r;
  r.run_id = run_id;
  r.board.board_serial = 7;
  r.board.sample_period_s = sample_period_s;
  r.utc_at_index0 = utc_at_index0;
  r.started_unix = utc_at_index0;
  return r;
}

}  // namespace accrue::storage::testing
