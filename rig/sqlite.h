// Thin RAII wrappers over the SQLite C API, returning Status values.
// Every statement is prepared with bound parameters; nothing is spliced into SQL.
#pragma once

#include <sqlite3.h>

#include <cstdint>
#include <memory>
#include <string>
#include <string_view>

#include "drivers/status.h"

namespace kp::sql {

class Db;

class Stmt {
 public:
  Stmt() = default;
  Stmt(sqlite3* db, sqlite3_stmt* stmt) : db_(db), stmt_(stmt) {}
  Stmt(Stmt&& o) noexcept : db_(o.db_), stmt_(o.stmt_) { o.stmt_ = nullptr; }
  Stmt& operator=(Stmt&& o) noexcept;
  ~Stmt();

  Stmt& Bind(int index, int64_t v);
  Stmt& Bind(int index, int v) { return Bind(index, static_cast<int64_t>(v)); }
  Stmt& Bind(int index, double v);
  Stmt& Bind(int index, std::string_view v);
  Stmt& BindNull(int index);

  // Runs one step. Result: true when a row is available, false when done.
  Result<bool> Step();
  // Steps to completion, for statements with no rows.
  Status Run();
  void Reset();

  int64_t Int(int col) const { return sqlite3_column_int64(stmt_, col); }
  double Real(int col) const { return sqlite3_column_double(stmt_, col); }
  std::string Text(int col) const;
  bool IsNull(int col) const { return sqlite3_column_type(stmt_, col) == SQLITE_NULL; }
  sqlite3_stmt* raw() { return stmt_; }

 private:
  sqlite3* db_ = nullptr;
  sqlite3_stmt* stmt_ = nullptr;
};

class Db {
 public:
  // Opens (creating when `create`) the database file; read_only opens without
  // writing. `vfs` names a registered SQLite VFS (empty: the default one).
  static Result<std::unique_ptr<Db>> Open(const std::string& path, bool create, bool read_only = false, const std::string& vfs = "");
  ~Db();

  Result<Stmt> Prepare(std::string_view sql);
  // Executes one or more statements without parameters (schema, pragmas).
  Status Exec(std::string_view sql);
  Status Error(std::string_view what) const;  // builds a Status from the last error
  sqlite3* raw() { return db_; }
  const std::string& path() const { return path_; }

 private:
  Db(sqlite3* db, std::string path) : db_(db), path_(std::move(path)) {}
  sqlite3* db_;
  std::string path_;
};

// Maps an SQLite result code to a Status kind (full disk and read-only are kIo,
// corruption is kCorruption, busy/locked is kUnavailable).
Status FromSqlite(int rc, sqlite3* db, std::string_view what);

}  // namespace kp::sql
