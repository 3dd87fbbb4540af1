#pragma once
// Database owns one SQLite connection; Statement owns one prepared statement
// on it. Every SQLite return code is checked and turned into a Status naming
// the statement that failed. Neither is thread-safe: one connection per thread
// (the writer has its own, every reader its own).
#include <sqlite3.h>

#include <cstdint>
#include <memory>
#include <span>
#include <string>
#include <string_view>

#include "storage/status.hpp"

namespace accrue::storage {

class Statement {
 public:
  Statement() = default;
  Statement(sqlite3* db, sqlite3_stmt* stmt) : db_(db), stmt_(stmt) {}
  Statement(Statement&& o) noexcept : db_(o.db_), stmt_(o.stmt_) { o.stmt_ = nullptr; }
  Statement& operator=(Statement&& o) noexcept;
  Statement(const Statement&) = delete;
  Statement& operator=(const Statement&) = delete;
  ~Statement();

  // Bind by 1-based position. Errors surface at step().
  Statement& bind(int pos, std::int64_t v);
  Statement& bind(int pos, double v);
  Statement& bind(int pos, std::string_view v);
  Statement& bind(int pos, std::span<const std::uint8_t> blob);
  Statement& bind_null(int pos);
  // SQLITE_ROW -> true with `row`; SQLITE_DONE -> true without; else error.
  Status step(bool* row = nullptr);
  // step() until done, then reset.
  Status run();
  void reset();
  std::int64_t column_int(int col) const { return sqlite3_column_int64(stmt_, col); }
  double column_double(int col) const { return sqlite3_column_double(stmt_, col); }
  std::string column_text(int col) const;
  bool column_is_null(int col) const { return sqlite3_column_type(stmt_, col) == SQLITE_NULL; }
  sqlite3_stmt* raw() const { return stmt_; }

 private:
  sqlite3* db_ = nullptr;
  sqlite3_stmt* stmt_ = nullptr;
  int bind_error_ = SQLITE_OK;
};

class Database {
 public:
  enum class Mode { read_write_create, read_only };
  static Status open(const std::string& path, Mode mode, std::unique_ptr<Database>& out);
  ~Database();
  Database(const Database&) = delete;
  Database& operator=(const Database&) = delete;

  Status exec(std::string_view sql);
  Status prepare(std::string_view sql, Statement& out);
  sqlite3* handle() const { return db_; }
  std::string last_error() const { return sqlite3_errmsg(db_); }

 private:
  explicit Database(sqlite3* db) : db_(db) {}
  sqlite3* db_;
};

}  // namespace accrue::storage
