#pragma once
// Brings a database file to the schema version this build knows
// (PRAGMA user_version), applying storage/migrations/NNNN_*.sql in order, each
// with its user_version bump, all inside one transaction: a failure leaves the
// file at the version it had. A file from a newer build is refused before
// anything is written to it (check_schema_version is read-only).
#include <string>

#include "storage/database.hpp"

namespace accrue::storage {

inline constexpr int kSchemaVersion = 4;

// Read-only: fails with a message naming both versions when the file is newer.
Status check_schema_version(Database& db, int& version_out);
// The user_version of the file at `path` without changing it; 0 when there is no file yet.
Status stored_schema_version(const std::string& path, int& version_out);
// To kSchemaVersion.
Status migrate(Database& db);
// To `target` (<= kSchemaVersion); tests use it to build files of each earlier version.
Status migrate_to(Database& db, int target);
// WAL mode and the durability settings the writer relies on (see README, Storage).
Status configure_writer_connection(Database& db);

}  // namespace accrue::storage
