#pragma once
// Brings a database file to the schema version this build knows
// (PRAGMA user_version), applying each migration in order inside one
// transaction. A file from a newer build is refused unchanged.
#include "storage/database.hpp"

namespace accrue::storage {

inline constexpr int kSchemaVersion = 1;

Status migrate(Database& db);
// WAL mode and the durability settings the writer relies on (see README, Storage).
Status configure_writer_connection(Database& db);

}  // namespace accrue::storage
