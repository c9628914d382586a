#include "rig/lab/lab_sync.h"

#include <sys/resource.h>
#include <sys/syscall.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <climits>
#include <map>

#include <fmt/format.h>

#include "rig/lab/lab_schema.h"

namespace kp::lab {
namespace {

// A value of the bench row as COPY text (NULL as \N).
void AppendCopyValue(std::string& out, sqlite3_stmt* st, int col, char kind) {
  const int type = sqlite3_column_type(st, col);
  if (type == SQLITE_NULL) {
    out += "\\N";
    return;
  }
  if (kind == 'i') {
    fmt::format_to(std::back_inserter(out), "{}", sqlite3_column_int64(st, col));
  } else if (kind == 'r') {
    fmt::format_to(std::back_inserter(out), "{}", sqlite3_column_double(st, col));
  } else {
    const auto* p = reinterpret_cast<const char*>(sqlite3_column_text(st, col));
    pg::CopyEscape(out, std::string_view(p, static_cast<size_t>(sqlite3_column_bytes(st, col))));
  }
}

pg::Param ParamOf(sql::Stmt& q, int col, char kind) {
  if (q.IsNull(col)) return std::nullopt;
  if (kind == 'i') return std::to_string(q.Int(col));
  if (kind == 'r') return fmt::format("{}", q.Real(col));
  return q.Text(col);
}

// The bench's fingerprint of a run: changes whenever anything the sync sends does.
constexpr const char* kMarkExpr =
    "t.sample_count || '|' || t.outcome || '|' || IFNULL(t.heartbeat_at, '') || '|' || IFNULL(t.progress_t_s, '') || '|' || "
    "IFNULL(t.ended_at, '') || '|' || IFNULL(t.verdict, '') || '|' || t.resumes || '|' || "
    "(SELECT IFNULL(MAX(id), 0) FROM events e WHERE e.run_id = t.id) || '|' || "
    "(SELECT COUNT(*) || ':' || IFNULL(SUM(ended_s IS NOT NULL), 0) FROM steps s WHERE s.run_id = t.id) || '|' || "
    "(SELECT COUNT(*) FROM dcir_points d WHERE d.run_id = t.id) || '|' || "
    "(SELECT COUNT(*) FROM run_tags g WHERE g.run_id = t.id) || '|' || "
    "(SELECT COUNT(*) FROM instruments i WHERE i.run_id = t.id)";

std::string RunColumnList() {
  std::string s;
  for (const LabColumn& c : LabRunColumns()) s += fmt::format("{}{}", s.empty() ? "" : ", ", c.lab);
  return s;
}

}  // namespace

std::string WithConnectTimeout(const std::string& url, int seconds) {
  if (url.find("connect_timeout=") != std::string::npos) return url;
  return url + (url.find('?') == std::string::npos ? "?" : "&") + fmt::format("connect_timeout={}", seconds);
}

Result<std::unique_ptr<LabSync>> LabSync::Connect(const std::string& url, SyncOptions options) {
  KP_ASSIGN_OR_RETURN(auto conn, pg::PgConn::Connect(url));
  KP_RETURN_IF_ERROR(MigrateLab(*conn));
  if (options.batch_rows < 1) options.batch_rows = 1;
  return std::unique_ptr<LabSync>(new LabSync(std::move(conn), std::move(options)));
}

Result<SyncStats> LabSync::Pass(sql::Db& bench) {
  SyncStats stats;
  // One read snapshot of the bench for the whole pass.
  KP_RETURN_IF_ERROR(bench.Exec("BEGIN"));
  struct Closer {
    sql::Db& db;
    ~Closer() { (void)db.Exec("COMMIT"); }
  } closer{bench};

  struct BenchRun {
    int64_t id;
    std::string uuid, mark;
  };
  std::vector<BenchRun> runs;
  {
    KP_ASSIGN_OR_RETURN(auto q, bench.Prepare(fmt::format("SELECT t.id, t.uuid, {} FROM runs t ORDER BY t.id", kMarkExpr)));
    for (;;) {
      KP_ASSIGN_OR_RETURN(bool row, q.Step());
      if (!row) break;
      runs.push_back({q.Int(0), q.Text(1), q.Text(2)});
    }
  }
  stats.runs = static_cast<int>(runs.size());
  if (runs.empty()) return stats;

  // What the server holds of these runs (their fingerprints), in one query.
  std::map<std::string, std::string> server;
  {
    std::string list = "{";
    for (size_t i = 0; i < runs.size(); ++i) list += (i ? "," : "") + runs[i].uuid;
    list += "}";
    KP_ASSIGN_OR_RETURN(auto r, conn_->Query("SELECT uuid::text, sync_mark FROM kneepoint.runs WHERE uuid = ANY($1::uuid[])", {list}));
    for (int i = 0; i < r.rows(); ++i) server[r.Text(i, 0)] = r.Text(i, 1);
  }
  for (const BenchRun& run : runs) {
    auto it = server.find(run.uuid);
    if (it != server.end() && it->second == run.mark) continue;
    ++stats.runs_sent;
    KP_RETURN_IF_ERROR(SyncRun(bench, run.id, run.uuid, run.mark, stats).WithContext("syncing run " + run.uuid));
  }
  return stats;
}

Status LabSync::SyncRun(sql::Db& bench, int64_t run_id, const std::string& uuid, const std::string& mark, SyncStats& stats) {
  const auto& rcols = LabRunColumns();
  // The run's row as the bench holds it now.
  std::vector<pg::Param> row;
  {
    std::string sel;
    for (const LabColumn& c : rcols) sel += fmt::format("{}{}", sel.empty() ? "" : ", ", c.bench);
    KP_ASSIGN_OR_RETURN(auto q, bench.Prepare(fmt::format("SELECT {} FROM runs t JOIN cells c ON c.id = t.cell_id WHERE t.id = ?1", sel)));
    q.Bind(1, run_id);
    KP_ASSIGN_OR_RETURN(bool found, q.Step());
    if (!found) return NotFound(fmt::format("run {} vanished from the bench", run_id));
    for (size_t i = 0; i < rcols.size(); ++i) row.push_back(ParamOf(q, static_cast<int>(i), rcols[i].kind));
  }
  std::string placeholders;
  for (size_t i = 0; i < rcols.size(); ++i) placeholders += fmt::format("{}${}", i ? ", " : "", i + 1);
  // First a row the children can point at (an existing row is left as it is
  // until they are all sent, so its fingerprint never runs ahead of them).
  {
    KP_ASSIGN_OR_RETURN(auto r, conn_->Query(fmt::format("INSERT INTO kneepoint.runs ({}) VALUES ({}) ON CONFLICT (uuid) DO NOTHING",
                                                         RunColumnList(), placeholders),
                                             row));
    (void)r;
  }

  for (const LabTable& t : LabTables()) {
    // Where to resume: what the server holds.
    KP_ASSIGN_OR_RETURN(auto hw, conn_->Query(fmt::format("SELECT MAX({}) FROM kneepoint.{} WHERE run_uuid = $1", t.mark_lab, t.name), {uuid}));
    int64_t from = INT64_MIN;
    if (!hw.IsNull(0, 0)) from = t.rows_change ? hw.Int(0, 0) : hw.Int(0, 0) + 1;

    std::string bench_cols, lab_cols, updates;
    for (const LabColumn& c : t.columns) {
      bench_cols += fmt::format(", t.{}", c.bench);
      lab_cols += fmt::format(", {}", c.lab);
      if (std::string_view(c.lab) != t.mark_lab) updates += fmt::format("{}{} = EXCLUDED.{}", updates.empty() ? "" : ", ", c.lab, c.lab);
    }
    const std::string stage = fmt::format("kp_stage_{}", t.name);
    if (std::find(staged_.begin(), staged_.end(), stage) == staged_.end()) {
      KP_RETURN_IF_ERROR(conn_->Exec(fmt::format(
          "CREATE TEMP TABLE IF NOT EXISTS {} (LIKE kneepoint.{} INCLUDING DEFAULTS) ON COMMIT DELETE ROWS", stage, t.name)));
      staged_.push_back(stage);
    }
    const std::string merge = fmt::format(
        "INSERT INTO kneepoint.{0} (run_uuid{1}) SELECT run_uuid{1} FROM {2} ON CONFLICT (run_uuid, {3}) {4}", t.name, lab_cols,
        stage, t.mark_lab, t.rows_change && !updates.empty() ? "DO UPDATE SET " + updates : std::string("DO NOTHING"));
    const std::string copy_target = fmt::format("{} (run_uuid{})", stage, lab_cols);
    const std::string direct_target = fmt::format("kneepoint.{} (run_uuid{})", t.name, lab_cols);

    KP_ASSIGN_OR_RETURN(auto q, bench.Prepare(fmt::format("SELECT {} FROM {} t WHERE t.run_id = ?1 AND t.{} >= ?2 ORDER BY t.{} LIMIT ?3",
                                                          bench_cols.substr(2), t.name, t.mark_bench, t.mark_bench)));
    std::string data;
    for (;;) {
      q.Reset();
      q.Bind(1, run_id).Bind(2, from).Bind(3, static_cast<int64_t>(options_.batch_rows));
      data.clear();
      int n = 0;
      int64_t last = from;
      for (;;) {
        KP_ASSIGN_OR_RETURN(bool has, q.Step());
        if (!has) break;
        sqlite3_stmt* raw = q.raw();
        data += uuid;
        for (size_t c = 0; c < t.columns.size(); ++c) {
          data += '\t';
          AppendCopyValue(data, raw, static_cast<int>(c), t.columns[c].kind);
        }
        data += '\n';
        last = q.Int(0);
        ++n;
      }
      if (n == 0) break;
      // Rows that never change (samples, events) start above what the server
      // holds, so they go straight into the table: one COPY, the speed of a
      // raw load. A key already there (another sync of the same bench got
      // ahead) refuses the whole COPY and the batch goes again through the
      // staging table, whose merge skips what the server has.
      if (options_.before_batch) options_.before_batch(stats.batches + 1);
      // One transaction: COPY into `target`, then `then` (empty: nothing).
      auto send = [&](const std::string& target, const std::string& then) {
        Status st = conn_->Exec("BEGIN");
        if (st.ok()) st = conn_->CopyIn(target, data);
        if (st.ok() && options_.after_copy) options_.after_copy(stats.batches + 1);
        if (st.ok() && !then.empty()) st = conn_->Exec(then);
        if (st.ok()) st = conn_->Exec("COMMIT");
        if (!st.ok()) (void)conn_->Exec("ROLLBACK");
        return st;
      };
      Status st = t.rows_change ? send(copy_target, merge) : send(direct_target, "");
      if (!t.rows_change && st.code() == StatusCode::kInvalidInput) st = send(copy_target, merge);
      if (!st.ok()) return st.WithContext(fmt::format("sending {}", t.name));
      ++stats.batches;
      stats.rows += n;
      if (std::string_view(t.name) == "samples") stats.samples += n;
      if (n < options_.batch_rows) break;
      from = last + 1;
    }
  }

  // Tags (a set; a handful per run).
  {
    KP_ASSIGN_OR_RETURN(auto q, bench.Prepare("SELECT tag FROM run_tags WHERE run_id = ?1 ORDER BY tag"));
    q.Bind(1, run_id);
    for (;;) {
      KP_ASSIGN_OR_RETURN(bool has, q.Step());
      if (!has) break;
      KP_ASSIGN_OR_RETURN(auto r, conn_->Query("INSERT INTO kneepoint.run_tags (run_uuid, tag) VALUES ($1, $2) ON CONFLICT DO NOTHING",
                                               {uuid, q.Text(0)}));
      (void)r;
    }
  }

  // Last, the row itself with its fingerprint: from now on the server holds
  // everything of the run this pass saw.
  std::string updates;
  for (const LabColumn& c : rcols) {
    if (std::string_view(c.lab) == "uuid") continue;
    updates += fmt::format("{} = EXCLUDED.{}, ", c.lab, c.lab);
  }
  row.push_back(mark);
  KP_ASSIGN_OR_RETURN(auto up, conn_->Query(fmt::format("INSERT INTO kneepoint.runs ({}, sync_mark) VALUES ({}, ${}) ON CONFLICT (uuid) "
                                                        "DO UPDATE SET {}sync_mark = EXCLUDED.sync_mark, synced_at = now()",
                                                        RunColumnList(), placeholders, rcols.size() + 1, updates),
                                            row));
  (void)up;
  return Status::Ok();
}

Result<SyncStats> SyncOnce(const std::string& bench_path, const std::string& url, SyncOptions options) {
  KP_ASSIGN_OR_RETURN(auto bench, sql::Db::Open(bench_path, /*create=*/false, /*read_only=*/true));
  KP_ASSIGN_OR_RETURN(auto sync, LabSync::Connect(url, std::move(options)));
  return sync->Pass(*bench);
}

BackgroundSync::BackgroundSync(std::string bench_path, std::string url, Log log, double interval_s, double max_backoff_s)
    : bench_path_(std::move(bench_path)),
      url_(WithConnectTimeout(url, 5)),
      log_(std::move(log)),
      interval_s_(interval_s),
      max_backoff_s_(max_backoff_s) {}

BackgroundSync::~BackgroundSync() { Stop(0.0); }

void BackgroundSync::Start() {
  if (thread_.joinable()) return;
  thread_ = std::thread([this] { Loop(); });
}

void BackgroundSync::Stop(double final_timeout_s) {
  {
    std::lock_guard<std::mutex> lock(mu_);
    if (!thread_.joinable()) return;
    stop_ = true;
    final_timeout_s_ = final_timeout_s;
  }
  cv_.notify_all();
  thread_.join();
}

Status BackgroundSync::OnePass() {
  if (!sync_ || !sync_->conn().alive()) {
    sync_.reset();
    KP_ASSIGN_OR_RETURN(sync_, LabSync::Connect(url_));
  }
  KP_ASSIGN_OR_RETURN(auto bench, sql::Db::Open(bench_path_, false, true));
  auto stats = sync_->Pass(*bench);
  if (!stats.ok()) {
    sync_.reset();  // a fresh connection next time (no half-open transaction)
    return stats.status();
  }
  return Status::Ok();
}

void BackgroundSync::Loop() {
  // Below the run's threads: the sync only ever takes what is left over.
  (void)setpriority(PRIO_PROCESS, static_cast<id_t>(syscall(SYS_gettid)), 10);
  using namespace std::chrono;
  double wait_s = interval_s_;
  std::string last_error;
  for (;;) {
    {
      std::unique_lock<std::mutex> lock(mu_);
      cv_.wait_for(lock, duration<double>(wait_s), [this] { return stop_; });
      if (stop_) break;
    }
    Status st = OnePass();
    if (st.ok()) {
      ++passes_ok_;
      if (!last_error.empty() && log_) log_("lab sync: working again");
      last_error.clear();
      wait_s = interval_s_;
    } else {
      ++passes_failed_;
      if (st.message() != last_error && log_) log_(fmt::format("lab sync failed (retrying, the run goes on): {}", st.message()));
      last_error = st.message();
      wait_s = std::min(max_backoff_s_, std::max(interval_s_, wait_s * 2));
    }
  }
  // The last pass, retried for a while: what the run ended with.
  const auto deadline = steady_clock::now() + duration<double>(final_timeout_s_);
  double backoff = 0.2;
  for (;;) {
    Status st = OnePass();
    if (st.ok()) {
      ++passes_ok_;
      return;
    }
    ++passes_failed_;
    if (steady_clock::now() + duration<double>(backoff) > deadline) {
      if (log_) log_(fmt::format("lab sync: the last pass failed ({}); `kneepoint sync` sends the rest later", st.message()));
      return;
    }
    std::this_thread::sleep_for(duration<double>(backoff));
    backoff = std::min(2.0, backoff * 2);
  }
}

}  // namespace kp::lab
