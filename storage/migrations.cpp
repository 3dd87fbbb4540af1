#include "storage/migrations.hpp"

#include <string>

#include "storage/schema_sql.hpp"

namespace accrue::storage {
namespace {

// migrations[v] takes a file from version v to v + 1.
const char* const kMigrations[] = {kSchemaSql};
static_assert(std::size(kMigrations) == kSchemaVersion);

Status user_version(Database& db, int& out) {
  Statement st;
  if (Status s = db.prepare("PRAGMA user_version", st); !s.ok()) return s;
  bool row = false;
  if (Status s = st.step(&row); !s.ok()) return s;
  out = row ? int(st.column_int(0)) : 0;
  return Status::success();
}

}  // namespace

Status configure_writer_connection(Database& db) {
  if (Status s = db.exec("PRAGMA journal_mode = WAL"); !s.ok()) return s;
  // NORMAL in WAL: a power cut may lose the last transactions, never corrupts.
  if (Status s = db.exec("PRAGMA synchronous = NORMAL"); !s.ok()) return s;
  return db.exec("PRAGMA foreign_keys = ON");
}

Status migrate(Database& db) {
  int version = 0;
  if (Status s = user_version(db, version); !s.ok()) return s;
  if (version > kSchemaVersion) {
    return Status::error(SQLITE_MISMATCH, "database schema version " + std::to_string(version) +
                                              " is newer than this accrued understands (" +
                                              std::to_string(kSchemaVersion) + "); refusing to touch it");
  }
  if (version == kSchemaVersion) return Status::success();
  if (Status s = db.exec("BEGIN IMMEDIATE"); !s.ok()) return s;
  for (int v = version; v < kSchemaVersion; ++v) {
    if (Status s = db.exec(kMigrations[v]); !s.ok()) {
      (void)db.exec("ROLLBACK");
      return Status::error(s.code, "migration to schema version " + std::to_string(v + 1) + " failed: " + s.message);
    }
  }
  if (Status s = db.exec("PRAGMA user_version = " + std::to_string(kSchemaVersion)); !s.ok()) {
    (void)db.exec("ROLLBACK");
    return s;
  }
  return db.exec("COMMIT");
}

}  // namespace accrue::storage
