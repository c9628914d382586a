#include "rig/lab/pg.h"

#include <libpq-fe.h>

#include <charconv>
#include <cstdlib>

#include <fmt/format.h>

namespace kp::pg {

bool IsPostgresUrl(std::string_view url) { return url.starts_with("postgresql://") || url.starts_with("postgres://"); }

std::string RedactUrl(std::string_view url) {
  std::string u(url);
  const size_t scheme = u.find("://");
  if (scheme == std::string::npos) return u;
  const size_t at = u.find('@', scheme + 3);
  if (at == std::string::npos) return u;
  const size_t colon = u.find(':', scheme + 3);
  if (colon != std::string::npos && colon < at) u.replace(colon + 1, at - colon - 1, "***");
  // A password given as a query parameter.
  const size_t pw = u.find("password=");
  if (pw != std::string::npos) {
    const size_t end = u.find('&', pw);
    u.replace(pw + 9, (end == std::string::npos ? u.size() : end) - pw - 9, "***");
  }
  return u;
}

PgResult& PgResult::operator=(PgResult&& o) noexcept {
  if (this != &o) {
    if (r_ != nullptr) PQclear(r_);
    r_ = o.r_;
    o.r_ = nullptr;
  }
  return *this;
}

PgResult::~PgResult() {
  if (r_ != nullptr) PQclear(r_);
}

int PgResult::rows() const { return r_ == nullptr ? 0 : PQntuples(r_); }
int PgResult::cols() const { return r_ == nullptr ? 0 : PQnfields(r_); }
bool PgResult::IsNull(int row, int col) const { return PQgetisnull(r_, row, col) != 0; }
std::string PgResult::Text(int row, int col) const { return std::string(View(row, col)); }
std::string_view PgResult::View(int row, int col) const {
  return std::string_view(PQgetvalue(r_, row, col), static_cast<size_t>(PQgetlength(r_, row, col)));
}
int64_t PgResult::Int(int row, int col) const {
  std::string_view v = View(row, col);
  int64_t out = 0;
  std::from_chars(v.data(), v.data() + v.size(), out);
  return out;
}
double PgResult::Real(int row, int col) const {
  // float8 output is the shortest text that reads back to the same double
  // (PostgreSQL 12 and later, extra_float_digits = 1): strtod gives it back exactly.
  return std::strtod(PQgetvalue(r_, row, col), nullptr);
}
std::optional<double> PgResult::OptReal(int row, int col) const {
  if (IsNull(row, col)) return std::nullopt;
  return Real(row, col);
}
std::string PgResult::ColumnName(int col) const { return PQfname(r_, col); }

Result<std::unique_ptr<PgConn>> PgConn::Connect(const std::string& url) {
  pg_conn* c = PQconnectdb(url.c_str());
  if (c == nullptr) return Unavailable("PostgreSQL: out of memory connecting");
  if (PQstatus(c) != CONNECTION_OK) {
    std::string msg = PQerrorMessage(c);
    while (!msg.empty() && (msg.back() == '\n' || msg.back() == ' ')) msg.pop_back();
    PQfinish(c);
    return Unavailable(fmt::format("cannot connect to {}: {}", RedactUrl(url), msg));
  }
  std::unique_ptr<PgConn> conn(new PgConn(c, url));
  // Quiet notices ("relation already exists, skipping") and a fixed float
  // format (shortest exact) whatever the server's defaults.
  PQsetNoticeProcessor(c, [](void*, const char*) {}, nullptr);
  KP_RETURN_IF_ERROR(conn->Exec("SET extra_float_digits = 1; SET client_encoding = 'UTF8'; SET TIME ZONE 'UTC'"));
  return conn;
}

PgConn::~PgConn() {
  if (c_ != nullptr) PQfinish(c_);
}

bool PgConn::alive() const { return PQstatus(c_) == CONNECTION_OK; }

Status PgConn::ErrorFrom(pg_result* r, std::string_view what) {
  std::string msg = r != nullptr ? PQresultErrorMessage(r) : PQerrorMessage(c_);
  if (msg.empty()) msg = PQerrorMessage(c_);
  while (!msg.empty() && (msg.back() == '\n' || msg.back() == ' ')) msg.pop_back();
  const char* field = r != nullptr ? PQresultErrorField(r, PG_DIAG_SQLSTATE) : nullptr;
  const std::string state = field != nullptr ? field : "";
  std::string text = fmt::format("PostgreSQL {}: {}", what, msg);
  if (r != nullptr) PQclear(r);
  // Class 08 (connection exception), 57P (operator intervention: shutdown)
  // and a connection gone bad are worth retrying; the rest is a refusal.
  if (PQstatus(c_) != CONNECTION_OK || state.empty()) return Unavailable(text);
  std::string_view s(state);
  if (s.starts_with("08") || s.starts_with("57P") || s.starts_with("53")) return Unavailable(text);
  if (s.starts_with("22") || s.starts_with("23") || s.starts_with("42")) return InvalidInput(text);
  return InternalError(text);
}

Status PgConn::Exec(std::string_view sql) {
  std::string s(sql);
  pg_result* r = PQexec(c_, s.c_str());
  const auto st = r == nullptr ? PGRES_FATAL_ERROR : PQresultStatus(r);
  if (st != PGRES_COMMAND_OK && st != PGRES_TUPLES_OK) return ErrorFrom(r, "statement");
  PQclear(r);
  return Status::Ok();
}

Result<PgResult> PgConn::Query(std::string_view sql, const std::vector<Param>& params) {
  std::string s(sql);
  std::vector<const char*> values;
  values.reserve(params.size());
  for (const Param& p : params) values.push_back(p ? p->c_str() : nullptr);
  pg_result* r = PQexecParams(c_, s.c_str(), static_cast<int>(values.size()), nullptr, values.data(), nullptr, nullptr, 0);
  const auto st = r == nullptr ? PGRES_FATAL_ERROR : PQresultStatus(r);
  if (st != PGRES_COMMAND_OK && st != PGRES_TUPLES_OK) return ErrorFrom(r, "query");
  return PgResult(r);
}

Status PgConn::CopyIn(std::string_view target, std::string_view data) {
  std::string s = fmt::format("COPY {} FROM STDIN", target);
  pg_result* r = PQexec(c_, s.c_str());
  if (r == nullptr || PQresultStatus(r) != PGRES_COPY_IN) return ErrorFrom(r, "COPY");
  PQclear(r);
  // Sent in pieces of at most 1 MiB.
  constexpr size_t kPiece = 1 << 20;
  for (size_t at = 0; at < data.size(); at += kPiece) {
    const size_t n = std::min(kPiece, data.size() - at);
    if (PQputCopyData(c_, data.data() + at, static_cast<int>(n)) != 1) {
      (void)PQputCopyEnd(c_, "client failed");
      return ErrorFrom(PQgetResult(c_), "COPY data");
    }
  }
  if (PQputCopyEnd(c_, nullptr) != 1) return ErrorFrom(nullptr, "COPY end");
  Status result = Status::Ok();
  while (pg_result* res = PQgetResult(c_)) {
    if (PQresultStatus(res) != PGRES_COMMAND_OK) {
      if (result.ok()) result = ErrorFrom(res, "COPY");
      else PQclear(res);
    } else {
      PQclear(res);
    }
  }
  return result;
}

void CopyEscape(std::string& out, std::string_view v) {
  for (char ch : v) {
    switch (ch) {
      case '\\': out += "\\\\"; break;
      case '\t': out += "\\t"; break;
      case '\n': out += "\\n"; break;
      case '\r': out += "\\r"; break;
      default: out += ch;
    }
  }
}

}  // namespace kp::pg
