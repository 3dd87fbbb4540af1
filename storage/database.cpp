#include "storage/database.hpp"

namespace accrue::storage {

Statement& Statement::operator=(Statement&& o) noexcept {
  if (this != &o) {
    if (stmt_) sqlite3_finalize(stmt_);
    db_ = o.db_;
    stmt_ = o.stmt_;
    o.stmt_ = nullptr;
  }
  return *this;
}

Statement::~Statement() {
  if (stmt_) sqlite3_finalize(stmt_);
}

Statement& Statement::bind(int pos, std::int64_t v) {
  const int rc = sqlite3_bind_int64(stmt_, pos, v);
  if (rc != SQLITE_OK) bind_error_ = rc;
  return *this;
}
Statement& Statement::bind(int pos, double v) {
  const int rc = sqlite3_bind_double(stmt_, pos, v);
  if (rc != SQLITE_OK) bind_error_ = rc;
  return *this;
}
Statement& Statement::bind(int pos, std::string_view v) {
  const int rc = sqlite3_bind_text(stmt_, pos, v.data(), int(v.size()), SQLITE_TRANSIENT);
  if (rc != SQLITE_OK) bind_error_ = rc;
  return *this;
}
Statement& Statement::bind(int pos, std::span<const std::uint8_t> blob) {
  // An empty span may have no pointer, and sqlite3_bind_blob binds NULL for a null pointer: an
  // empty blob must stay a blob (raw_block.data is NOT NULL; a block may carry 0 samples).
  const int rc = blob.empty() ? sqlite3_bind_zeroblob(stmt_, pos, 0)
                              : sqlite3_bind_blob(stmt_, pos, blob.data(), int(blob.size()), SQLITE_TRANSIENT);
  if (rc != SQLITE_OK) bind_error_ = rc;
  return *this;
}
Statement& Statement::bind_null(int pos) {
  const int rc = sqlite3_bind_null(stmt_, pos);
  if (rc != SQLITE_OK) bind_error_ = rc;
  return *this;
}

Status Statement::step(bool* row) {
  if (row) *row = false;
  if (bind_error_ != SQLITE_OK) {
    const int rc = bind_error_;
    bind_error_ = SQLITE_OK;
    return Status::error(rc, std::string("bind failed: ") + sqlite3_errstr(rc) + " in: " + sqlite3_sql(stmt_));
  }
  const int rc = sqlite3_step(stmt_);
  if (rc == SQLITE_ROW) {
    if (row) *row = true;
    return Status::success();
  }
  if (rc == SQLITE_DONE) return Status::success();
  return Status::error(rc, std::string(sqlite3_errmsg(db_)) + " in: " + sqlite3_sql(stmt_));
}

Status Statement::run() {
  bool row = true;
  Status s;
  while (row && (s = step(&row)).ok()) {
  }
  reset();
  return s;
}

void Statement::reset() {
  // sqlite3_reset repeats the last step's error, already reported by step().
  (void)sqlite3_reset(stmt_);
  (void)sqlite3_clear_bindings(stmt_);
}

std::string Statement::column_text(int col) const {
  const auto* p = sqlite3_column_text(stmt_, col);
  return p ? std::string(reinterpret_cast<const char*>(p), std::size_t(sqlite3_column_bytes(stmt_, col))) : std::string();
}

Status Database::open(const std::string& path, Mode mode, std::unique_ptr<Database>& out) {
  sqlite3* db = nullptr;
  const int flags = mode == Mode::read_only ? SQLITE_OPEN_READONLY
                                            : (SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE);
  const int rc = sqlite3_open_v2(path.c_str(), &db, flags | SQLITE_OPEN_NOMUTEX, nullptr);
  if (rc != SQLITE_OK) {
    Status s = Status::error(rc, "cannot open database " + path + ": " + (db ? sqlite3_errmsg(db) : sqlite3_errstr(rc)));
    sqlite3_close(db);
    return s;
  }
  sqlite3_extended_result_codes(db, 1);
  out.reset(new Database(db));
  // A reader may meet the writer mid-checkpoint: wait briefly rather than fail.
  return out->exec("PRAGMA busy_timeout = 5000");
}

Database::~Database() {
  // Statements are owned by callers and finalized before the database dies.
  sqlite3_close(db_);
}

Status Database::exec(std::string_view sql) {
  char* err = nullptr;
  const std::string text(sql);
  const int rc = sqlite3_exec(db_, text.c_str(), nullptr, nullptr, &err);
  if (rc == SQLITE_OK) return Status::success();
  std::string message = err ? err : sqlite3_errstr(rc);
  sqlite3_free(err);
  return Status::error(rc, message);
}

Status Database::prepare(std::string_view sql, Statement& out) {
  sqlite3_stmt* stmt = nullptr;
  const int rc = sqlite3_prepare_v3(db_, sql.data(), int(sql.size()), SQLITE_PREPARE_PERSISTENT, &stmt, nullptr);
  if (rc != SQLITE_OK) return Status::error(rc, std::string(sqlite3_errmsg(db_)) + " preparing: " + std::string(sql));
  out = Statement(db_, stmt);
  return Status::success();
}

}  // namespace accrue::storage
