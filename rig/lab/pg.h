// A thin RAII layer over libpq (PostgreSQL's C client library) for the lab
// database: one connection, statements with bound text parameters (nothing
// is spliced into SQL but identifiers the program itself owns), results read
// as text, and COPY ... FROM STDIN for bulk rows. Errors are Status values:
// a connection that cannot be made or was lost is kUnavailable (the caller
// retries later), a refused statement kInvalidInput or kInternal.
// Not thread-safe: one PgConn per thread.
#pragma once

#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "drivers/status.h"

struct pg_conn;
struct pg_result;

namespace kp::pg {

// True for the URLs the lab commands take as a PostgreSQL database
// (`postgresql://...` or `postgres://...`); anything else is a bench SQLite file.
bool IsPostgresUrl(std::string_view url);
// The URL with any password blanked, for messages and logs.
std::string RedactUrl(std::string_view url);

class PgResult {
 public:
  PgResult() = default;
  explicit PgResult(pg_result* r) : r_(r) {}
  PgResult(PgResult&& o) noexcept : r_(o.r_) { o.r_ = nullptr; }
  PgResult& operator=(PgResult&& o) noexcept;
  ~PgResult();

  int rows() const;
  int cols() const;
  bool IsNull(int row, int col) const;
  std::string Text(int row, int col) const;
  std::string_view View(int row, int col) const;
  int64_t Int(int row, int col) const;
  double Real(int row, int col) const;
  std::optional<double> OptReal(int row, int col) const;
  std::string ColumnName(int col) const;

 private:
  pg_result* r_ = nullptr;
};

// A parameter: text, or SQL NULL.
using Param = std::optional<std::string>;

class PgConn {
 public:
  // Connects to `url` (a libpq connection URI). kUnavailable when the server
  // cannot be reached.
  static Result<std::unique_ptr<PgConn>> Connect(const std::string& url);
  ~PgConn();

  // One or more statements without parameters.
  Status Exec(std::string_view sql);
  // One statement with $1, $2... parameters; rows as text.
  Result<PgResult> Query(std::string_view sql, const std::vector<Param>& params = {});
  // COPY <target> FROM STDIN (text format) with `data`: rows separated by
  // '\n', columns by '\t', values escaped with CopyEscape, NULL as \N.
  Status CopyIn(std::string_view target, std::string_view data);
  // False once the server closed the connection (the next use fails).
  bool alive() const;
  const std::string& url() const { return url_; }

 private:
  PgConn(pg_conn* c, std::string url) : c_(c), url_(std::move(url)) {}
  Status ErrorFrom(pg_result* r, std::string_view what);
  pg_conn* c_;
  std::string url_;
};

// Appends `v` escaped for COPY text format (backslash, tab, newline, CR).
void CopyEscape(std::string& out, std::string_view v);

}  // namespace kp::pg
