#include "storage/migrations.hpp"

#include <unistd.h>

#include <iterator>
#include <memory>
#include <string>

#include "storage/schema_sql.hpp"

namespace accrue::storage {

static_assert(std::size(kMigrationTexts) == kSchemaVersion,
              "storage/migrations/ must hold exactly one file per schema version");

Status check_schema_version(Database& db, int& version) {
  Statement st;
  if (Status s = db.prepare("PRAGMA user_version", st); !s.ok()) return s;
  bool row = false;
  if (Status s = st.step(&row); !s.ok()) return s;
  version = row ? int(st.column_int(0)) : 0;
  if (version > kSchemaVersion || version < 0) {
    return Status::error(SQLITE_MISMATCH, "database schema version " + std::to_string(version) +
                                              " is newer than this accrued understands (" +
                                              std::to_string(kSchemaVersion) +
                                              "); refusing to touch it (use a newer accrued)");
  }
  return Status::success();
}

Status stored_schema_version(const std::string& path, int& version) {
  version = 0;
  if (::access(path.c_str(), F_OK) != 0) return Status::success();
  std::unique_ptr<Database> db;
  if (Status s = Database::open(path, Database::Mode::read_only, db); !s.ok()) return s;
  Statement st;
  if (Status s = db->prepare("PRAGMA user_version", st); !s.ok()) return s;
  bool row = false;
  if (Status s = st.step(&row); !s.ok()) return s;
  version = row ? int(st.column_int(0)) : 0;
  return Status::success();
}

Status configure_writer_connection(Database& db) {
  if (Status s = db.exec("PRAGMA journal_mode = WAL"); !s.ok()) return s;
  // NORMAL in WAL: a power cut may lose the last transactions, never corrupts.
  // The writer raises it to FULL (WriterSettings::durable_commits, docs/reliability.md).
  if (Status s = db.exec("PRAGMA synchronous = NORMAL"); !s.ok()) return s;
  return db.exec("PRAGMA foreign_keys = ON");
}

Status migrate_to(Database& db, int target) {
  int version = 0;
  if (Status s = check_schema_version(db, version); !s.ok()) return s;
  if (target > kSchemaVersion) return Status::error(SQLITE_MISUSE, "no migration to version " + std::to_string(target));
  if (version >= target) return Status::success();
  if (Status s = db.exec("BEGIN IMMEDIATE"); !s.ok()) return s;
  for (int v = version; v < target; ++v) {
    Status s = db.exec(kMigrationTexts[v].sql);
    if (s.ok()) s = db.exec("PRAGMA user_version = " + std::to_string(v + 1));
    if (!s.ok()) {
      (void)db.exec("ROLLBACK");  // the migration's own error is the one to report
      return Status::error(s.code, "migration " + std::string(kMigrationTexts[v].file) + " (to schema version " +
                                       std::to_string(v + 1) + ") failed: " + s.message);
    }
  }
  return db.exec("COMMIT");
}

Status migrate(Database& db) { return migrate_to(db, kSchemaVersion); }

}  // namespace accrue::storage
