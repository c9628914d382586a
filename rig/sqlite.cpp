#include "rig/sqlite.h"

#include <fcntl.h>
#include <unistd.h>

#include <fmt/format.h>

namespace kp::sql {

Status FromSqlite(int rc, sqlite3* db, std::string_view what) {
  if (rc == SQLITE_OK || rc == SQLITE_DONE || rc == SQLITE_ROW) return Status::Ok();
  std::string msg = fmt::format("{}: {} ({})", what, db ? sqlite3_errmsg(db) : sqlite3_errstr(rc), rc);
  switch (rc & 0xff) {
    case SQLITE_FULL:
    case SQLITE_IOERR:
    case SQLITE_READONLY:
    case SQLITE_CANTOPEN:
    case SQLITE_PERM:
      return IoError(msg);
    case SQLITE_CORRUPT:
    case SQLITE_NOTADB:
      return CorruptionError(msg);
    case SQLITE_BUSY:
    case SQLITE_LOCKED:
      return Unavailable(msg);
    case SQLITE_CONSTRAINT:
    case SQLITE_MISMATCH:
      return InvalidInput(msg);
    default:
      return InternalError(msg);
  }
}

Stmt& Stmt::operator=(Stmt&& o) noexcept {
  if (this != &o) {
    if (stmt_) sqlite3_finalize(stmt_);
    db_ = o.db_;
    stmt_ = o.stmt_;
    o.stmt_ = nullptr;
  }
  return *this;
}

Stmt::~Stmt() {
  if (stmt_) sqlite3_finalize(stmt_);
}

Stmt& Stmt::Bind(int index, int64_t v) {
  sqlite3_bind_int64(stmt_, index, v);
  return *this;
}
Stmt& Stmt::Bind(int index, double v) {
  sqlite3_bind_double(stmt_, index, v);
  return *this;
}
Stmt& Stmt::Bind(int index, std::string_view v) {
  sqlite3_bind_text(stmt_, index, v.data(), static_cast<int>(v.size()), SQLITE_TRANSIENT);
  return *this;
}
Stmt& Stmt::BindNull(int index) {
  sqlite3_bind_null(stmt_, index);
  return *this;
}

Result<bool> Stmt::Step() {
  int rc = sqlite3_step(stmt_);
  if (rc == SQLITE_ROW) return true;
  if (rc == SQLITE_DONE) return false;
  Status st = FromSqlite(rc, db_, sqlite3_sql(stmt_));
  sqlite3_reset(stmt_);
  return st;
}

Status Stmt::Run() {
  for (;;) {
    KP_ASSIGN_OR_RETURN(bool row, Step());
    if (!row) break;
  }
  Reset();
  return Status::Ok();
}

void Stmt::Reset() {
  sqlite3_reset(stmt_);
  sqlite3_clear_bindings(stmt_);
}

std::string Stmt::Text(int col) const {
  const unsigned char* t = sqlite3_column_text(stmt_, col);
  return t ? std::string(reinterpret_cast<const char*>(t), static_cast<size_t>(sqlite3_column_bytes(stmt_, col))) : std::string();
}

namespace {

// Retry `count` (from 0): 0.2 ms for the first 50 tries, 1 ms for the next
// 150, then 5 ms, giving up after about 5 s in all.
int BusyWait(void* /*unused*/, int count) {
  constexpr int kFast = 50, kMedium = 200;
  constexpr int kLimit = kMedium + (5000 - 10 - 150) / 5;
  if (count >= kLimit) return 0;
  ::usleep(count < kFast ? 200 : count < kMedium ? 1000 : 5000);
  return 1;
}

}  // namespace

Result<std::unique_ptr<Db>> Db::Open(const std::string& path, bool create, bool read_only, const std::string& vfs) {
  sqlite3* db = nullptr;
  if (create && !read_only && !path.empty() && path != ":memory:" && path.rfind("file:", 0) != 0) {
    // A new database is created 0640 (less when the umask says so) rather
    // than SQLite's 0644: runs name cells, operators and hosts. Its WAL and
    // SHM files take the database's mode (SQLite's unix VFS).
    int fd = ::open(path.c_str(), O_WRONLY | O_CREAT | O_EXCL | O_NOFOLLOW | O_CLOEXEC, 0640);
    if (fd >= 0) ::close(fd);
  }
  int flags = read_only ? SQLITE_OPEN_READONLY : (SQLITE_OPEN_READWRITE | (create ? SQLITE_OPEN_CREATE : 0));
  int rc = sqlite3_open_v2(path.c_str(), &db, flags | SQLITE_OPEN_NOMUTEX, vfs.empty() ? nullptr : vfs.c_str());
  if (rc != SQLITE_OK) {
    Status st = FromSqlite(rc, db, "opening database " + path);
    sqlite3_close(db);
    return st;
  }
  sqlite3_extended_result_codes(db, 1);
  // Another connection holds the write lock (channels of one bench, the
  // panel's requests): wait up to about 5 s, in short steps, since a commit
  // takes milliseconds. SQLite's own busy timeout sleeps up to 100 ms a step
  // and made a channel's edge reading late behind its neighbours' commits.
  sqlite3_busy_handler(db, &BusyWait, nullptr);
  return std::unique_ptr<Db>(new Db(db, path));
}

Db::~Db() { sqlite3_close_v2(db_); }

Result<Stmt> Db::Prepare(std::string_view sql) {
  sqlite3_stmt* stmt = nullptr;
  int rc = sqlite3_prepare_v3(db_, sql.data(), static_cast<int>(sql.size()), SQLITE_PREPARE_PERSISTENT, &stmt, nullptr);
  if (rc != SQLITE_OK) return FromSqlite(rc, db_, fmt::format("preparing '{}'", sql));
  return Stmt(db_, stmt);
}

Status Db::Exec(std::string_view sql) {
  std::string s(sql);
  char* err = nullptr;
  int rc = sqlite3_exec(db_, s.c_str(), nullptr, nullptr, &err);
  if (err) sqlite3_free(err);
  return FromSqlite(rc, db_, path_);
}

Status Db::Error(std::string_view what) const { return FromSqlite(sqlite3_errcode(db_), db_, what); }

}  // namespace kp::sql
