#include "ui/web/lab_web.h"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <memory>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "drivers/clock.h"
#include "rig/lab/lab_mirror.h"
#include "rig/lab/lab_schema.h"
#include "rig/lab/pg.h"
#include "ui/report/run_report.h"
#include "rig/uuid.h"

namespace kp::lab {
namespace {

using json = nlohmann::json;
constexpr int kApiSchemaVersion = 1;

// One read-only connection per serving thread, made again when it broke.
Result<pg::PgConn*> ThreadConn(const std::string& url) {
  thread_local std::unique_ptr<pg::PgConn> conn;
  thread_local std::string conn_url;
  if (!conn || !conn->alive() || conn_url != url) {
    conn.reset();
    KP_ASSIGN_OR_RETURN(conn, pg::PgConn::Connect(url));
    KP_RETURN_IF_ERROR(conn->Exec("SET default_transaction_read_only = on"));
    conn_url = url;
  }
  return conn.get();
}

LabWeb::Response JsonAnswer(const json& j, int status = 200) {
  return {status, "application/json", j.dump(-1, ' ', false, json::error_handler_t::replace)};
}

LabWeb::Response ErrorAnswer(int status, const std::string& message) {
  return JsonAnswer(json{{"schema_version", kApiSchemaVersion}, {"error", message}}, status);
}

LabWeb::Response FromStatus(const Status& st) {
  switch (st.code()) {
    case StatusCode::kNotFound: return ErrorAnswer(404, st.message());
    case StatusCode::kInvalidInput: return ErrorAnswer(400, st.message());
    case StatusCode::kUnavailable: return ErrorAnswer(503, st.message());
    default: return ErrorAnswer(500, st.message());
  }
}

std::string Param(const LabWeb::Params& p, const std::string& key) {
  auto it = p.find(key);
  return it == p.end() ? std::string() : it->second;
}

// A whole number parameter in [lo, hi]; `fallback` when absent.
Result<int64_t> IntParam(const LabWeb::Params& p, const std::string& key, int64_t fallback, int64_t lo, int64_t hi) {
  const std::string v = Param(p, key);
  if (v.empty()) return fallback;
  int64_t out = 0;
  auto [ptr, ec] = std::from_chars(v.data(), v.data() + v.size(), out);
  if (ec != std::errc() || ptr != v.data() + v.size() || out < lo || out > hi)
    return InvalidInput(fmt::format("{}={}: give a whole number from {} to {}", key, v, lo, hi));
  return out;
}

// A `*`/`?` glob as an ILIKE pattern (with \ escaping).
std::string GlobToLike(std::string_view g) {
  std::string out;
  for (char c : g) {
    if (c == '%' || c == '_' || c == '\\') {
      out += '\\';
      out += c;
    } else if (c == '*') {
      out += '%';
    } else if (c == '?') {
      out += '_';
    } else {
      out += c;
    }
  }
  return out;
}

json Cell(const pg::PgResult& r, int row, int col, char kind) {
  if (r.IsNull(row, col)) return nullptr;
  if (kind == 'i') return r.Int(row, col);
  if (kind == 'r') return r.Real(row, col);
  if (kind == 'b') return r.View(row, col) == "t";
  return r.Text(row, col);
}

bool IsUuid(const std::string& s) { return LooksLikeUuid(s); }

// A result value as JSON text: strings escaped (RFC 8259 section 7; invalid
// UTF-8 is left to the database, which only holds valid UTF-8), numbers in
// the shortest form that reads back the same, NULL as null.
void AppendJsonValue(std::string& out, const pg::PgResult& r, int row, int col, char kind) {
  if (r.IsNull(row, col)) {
    out += "null";
    return;
  }
  if (kind == 'i') {
    fmt::format_to(std::back_inserter(out), "{}", r.Int(row, col));
    return;
  }
  if (kind == 'r') {
    const double v = r.Real(row, col);
    if (std::isfinite(v)) fmt::format_to(std::back_inserter(out), "{}", v);
    else out += "null";
    return;
  }
  out += '"';
  for (char ch : r.View(row, col)) {
    const auto u = static_cast<unsigned char>(ch);
    switch (ch) {
      case '"': out += "\\\""; break;
      case '\\': out += "\\\\"; break;
      case '\n': out += "\\n"; break;
      case '\r': out += "\\r"; break;
      case '\t': out += "\\t"; break;
      default:
        if (u < 0x20 || u == 0x7f) fmt::format_to(std::back_inserter(out), "\\u{:04x}", u);
        else out += ch;
    }
  }
  out += '"';
}

}  // namespace

LabWeb::Response LabWeb::Get(const std::string& path, const Params& params) const {
  if (path == "/" || path == "/index.html") return {200, "text/html; charset=utf-8", Page()};
  if (path == "/api/runs") return Runs(params);
  if (path == "/api/live") return Live();
  constexpr std::string_view kRuns = "/api/runs/";
  if (path.starts_with(kRuns)) {
    std::string rest = path.substr(kRuns.size());
    const size_t slash = rest.find('/');
    const std::string uuid = rest.substr(0, slash);
    if (!IsUuid(uuid)) return ErrorAnswer(400, fmt::format("'{}' is not a run UUID", uuid));
    if (slash == std::string::npos) return Figures(uuid);
    if (rest.substr(slash) == "/samples") return Samples(uuid, params);
  }
  return ErrorAnswer(404, fmt::format("no such page: {}", path));
}

LabWeb::Response LabWeb::Runs(const Params& p) const {
  auto limit = IntParam(p, "limit", 500, 1, 20000);
  if (!limit.ok()) return FromStatus(limit.status());
  auto offset = IntParam(p, "offset", 0, 0, INT64_MAX / 2);
  if (!offset.ok()) return FromStatus(offset.status());
  std::vector<pg::Param> args;
  std::string where;
  auto add = [&](const std::string& cond, const std::string& value) {
    args.push_back(value);
    where += fmt::format("{}{}", where.empty() ? " WHERE " : " AND ", fmt::format(fmt::runtime(cond), args.size()));
  };
  for (const auto& [key, col] : std::vector<std::pair<std::string, std::string>>{{"bench", "bench"},
                                                                                 {"cell", "cell"},
                                                                                 {"serial", "cell_serial"},
                                                                                 {"operator", "operator"},
                                                                                 {"procedure", "procedure_name"}}) {
    const std::string v = Param(p, key);
    if (!v.empty()) add(col + " ILIKE ${} ESCAPE '\\'", GlobToLike(v));
  }
  if (std::string v = Param(p, "outcome"); !v.empty()) {
    if (!ParseOutcome(v)) return ErrorAnswer(400, fmt::format("outcome={}: use running, completed, aborted or interrupted", v));
    add("outcome = ${}", v);
  }
  if (std::string v = Param(p, "verdict"); !v.empty()) {
    if (v != "pass" && v != "fail" && v != "not judged") return ErrorAnswer(400, fmt::format("verdict={}: use pass, fail or not judged", v));
    add("verdict = ${}", v);
  }
  if (std::string v = Param(p, "tag"); !v.empty())
    add("EXISTS (SELECT 1 FROM kneepoint.run_tags g WHERE g.run_uuid = r.uuid AND g.tag ILIKE ${} ESCAPE '\\')", GlobToLike(v));
  if (std::string v = Param(p, "since"); !v.empty()) add("started_at >= ${}", v);
  if (std::string v = Param(p, "until"); !v.empty()) add("started_at <= ${} || '~'", v);  // a date takes its whole day
  if (std::string v = Param(p, "text"); !v.empty())
    add("(cell || ' ' || cell_serial || ' ' || cell_lot || ' ' || cell_part || ' ' || bench || ' ' || operator || ' ' || "
        "procedure_name || ' ' || reason || ' ' || uuid::text) ILIKE ${} ESCAPE '\\'",
        "%" + GlobToLike(v) + "%");
  args.push_back(std::to_string(*limit));
  args.push_back(std::to_string(*offset));
  const std::string sql = fmt::format(
      "SELECT uuid::text, bench, bench_run_id, cell, cell_serial, operator, procedure_name, started_at, ended_at, outcome, reason, "
      "verdict, verdict_pct_of_rated, delivered_mah, rated_mah, sample_count, progress_t_s, COUNT(*) OVER () "
      "FROM kneepoint.runs r{} ORDER BY started_at DESC, bench, bench_run_id DESC LIMIT ${} OFFSET ${}",
      where, args.size() - 1, args.size());
  auto conn = ThreadConn(url_);
  if (!conn.ok()) return FromStatus(conn.status());
  auto r = (*conn)->Query(sql, args);
  if (!r.ok()) return FromStatus(r.status());
  static constexpr struct {
    const char* key;
    char kind;
  } kCols[] = {{"uuid", 't'},        {"bench", 't'},    {"bench_run", 'i'},      {"cell", 't'},
               {"serial", 't'},      {"operator", 't'}, {"procedure", 't'},      {"started_at", 't'},
               {"ended_at", 't'},    {"outcome", 't'},  {"reason", 't'},         {"verdict", 't'},
               {"verdict_pct_of_rated", 'r'},           {"delivered_mah", 'r'},  {"rated_mah", 'r'},
               {"samples", 'i'},     {"run_time_s", 'r'}};
  // Written straight from the rows (a list of 10,000 runs is several MB of
  // JSON: building it as a document first would cost several times as much).
  const int64_t total = r->rows() > 0 ? r->Int(0, static_cast<int>(std::size(kCols))) : 0;
  std::string out;
  out.reserve(static_cast<size_t>(r->rows()) * 420 + 100);
  fmt::format_to(std::back_inserter(out), R"({{"schema_version":{},"total":{},"offset":{},"runs":[)", kApiSchemaVersion, total, *offset);
  for (int row = 0; row < r->rows(); ++row) {
    out += row == 0 ? "{" : ",{";
    for (size_t c = 0; c < std::size(kCols); ++c) {
      if (c > 0) out += ',';
      out += '"';
      out += kCols[c].key;
      out += "\":";
      AppendJsonValue(out, *r, row, static_cast<int>(c), kCols[c].kind);
    }
    out += '}';
  }
  out += "]}";
  return {200, "application/json", std::move(out)};
}

LabWeb::Response LabWeb::Live() const {
  auto conn = ThreadConn(url_);
  if (!conn.ok()) return FromStatus(conn.status());
  auto r = (*conn)->Query(
      "SELECT r.uuid::text, r.bench, r.cell, r.procedure_name, r.started_at, r.sample_count, "
      "extract(epoch FROM now())::float8 - r.heartbeat_at, s.seq, s.t_s, s.voltage_v, s.current_a, s.temperature_c, s.step "
      "FROM kneepoint.runs r LEFT JOIN LATERAL (SELECT * FROM kneepoint.samples x WHERE x.run_uuid = r.uuid ORDER BY seq DESC LIMIT 1) s "
      "ON true WHERE r.outcome = 'running' ORDER BY r.bench, r.started_at");
  if (!r.ok()) return FromStatus(r.status());
  json live = json::array();
  for (int row = 0; row < r->rows(); ++row) {
    live.push_back({{"uuid", Cell(*r, row, 0, 't')},
                    {"bench", Cell(*r, row, 1, 't')},
                    {"cell", Cell(*r, row, 2, 't')},
                    {"procedure", Cell(*r, row, 3, 't')},
                    {"started_at", Cell(*r, row, 4, 't')},
                    {"samples", Cell(*r, row, 5, 'i')},
                    {"heartbeat_age_s", Cell(*r, row, 6, 'r')},
                    {"seq", Cell(*r, row, 7, 'i')},
                    {"t_s", Cell(*r, row, 8, 'r')},
                    {"voltage_v", Cell(*r, row, 9, 'r')},
                    {"current_a", Cell(*r, row, 10, 'r')},
                    {"temperature_c", Cell(*r, row, 11, 'r')},
                    {"step", Cell(*r, row, 12, 'i')}});
  }
  return JsonAnswer(json{{"schema_version", kApiSchemaVersion}, {"running", std::move(live)}});
}

LabWeb::Response LabWeb::Figures(const std::string& uuid) const {
  SteadyClock wall;
  auto mirror = LabMirror::OpenOnly(url_, wall, {uuid});
  if (!mirror.ok()) return FromStatus(mirror.status());
  auto id = (*mirror)->store().ResolveRun(uuid);
  if (!id.ok()) return ErrorAnswer(404, fmt::format("no run {} in the lab database", uuid));
  if (Status st = (*mirror)->Fill(*id); !st.ok()) return FromStatus(st);
  auto rep = BuildRunReport((*mirror)->store(), *id);
  if (!rep.ok()) return FromStatus(rep.status());
  json j = RunReportJson(*rep);
  return JsonAnswer(json{{"schema_version", kApiSchemaVersion}, {"uuid", uuid}, {"report", std::move(j)}});
}

LabWeb::Response LabWeb::Samples(const std::string& uuid, const Params& p) const {
  auto conn = ThreadConn(url_);
  if (!conn.ok()) return FromStatus(conn.status());
  const bool incremental = p.count("since") != 0;
  if (incremental == (p.count("width") != 0)) return ErrorAnswer(400, "give width=W (decimated) or since=SEQ (incremental)");
  if (incremental) {
    auto since = IntParam(p, "since", -1, -1, INT64_MAX / 2);
    if (!since.ok()) return FromStatus(since.status());
    auto limit = IntParam(p, "limit", 5000, 1, 100000);
    if (!limit.ok()) return FromStatus(limit.status());
    auto r = (*conn)->Query("SELECT seq, t_s, voltage_v, current_a, temperature_c, step FROM kneepoint.samples "
                            "WHERE run_uuid = $1 AND seq > $2 ORDER BY seq LIMIT $3",
                            {uuid, std::to_string(*since), std::to_string(*limit)});
    if (!r.ok()) return FromStatus(r.status());
    json rows = json::array();
    int64_t last = *since;
    for (int row = 0; row < r->rows(); ++row) {
      rows.push_back({r->Int(row, 0), r->Real(row, 1), r->Real(row, 2), r->Real(row, 3), r->Real(row, 4), r->Int(row, 5)});
      last = r->Int(row, 0);
    }
    return JsonAnswer(json{{"schema_version", kApiSchemaVersion},
                           {"uuid", uuid},
                           {"columns", {"seq", "t_s", "voltage_v", "current_a", "temperature_c", "step"}},
                           {"samples", std::move(rows)},
                           {"next_since", last}});
  }
  auto width = IntParam(p, "width", 0, 1, 20000);
  if (!width.ok()) return FromStatus(width.status());
  auto count = (*conn)->Query("SELECT COALESCE(MAX(seq) + 1, 0) FROM kneepoint.samples WHERE run_uuid = $1", {uuid});
  if (!count.ok()) return FromStatus(count.status());
  const int64_t n = count->Int(0, 0);
  const int64_t per = std::max<int64_t>(1, (n + *width - 1) / *width);
  auto r = (*conn)->Query(
      "SELECT seq / $2 AS b, MIN(seq), MIN(t_s), MAX(t_s), MIN(voltage_v), MAX(voltage_v), MIN(current_a), MAX(current_a), "
      "MAX(temperature_c) FROM kneepoint.samples WHERE run_uuid = $1 GROUP BY b ORDER BY b",
      {uuid, std::to_string(per)});
  if (!r.ok()) return FromStatus(r.status());
  json rows = json::array();
  for (int row = 0; row < r->rows(); ++row)
    rows.push_back({r->Int(row, 1), r->Real(row, 2), r->Real(row, 3), r->Real(row, 4), r->Real(row, 5), r->Real(row, 6), r->Real(row, 7),
                    r->Real(row, 8)});
  return JsonAnswer(json{{"schema_version", kApiSchemaVersion},
                         {"uuid", uuid},
                         {"samples_total", n},
                         {"per_bucket", per},
                         {"columns", {"first_seq", "t_first_s", "t_last_s", "voltage_min_v", "voltage_max_v", "current_min_a",
                                      "current_max_a", "temperature_max_c"}},
                         {"buckets", std::move(rows)}});
}

}  // namespace kp::lab
