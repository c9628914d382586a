#include "rig/store.h"

#include <fmt/format.h>

#include <signal.h>
#include <unistd.h>

#include <algorithm>
#include <cctype>
#include <chrono>
#include <cerrno>
#include <ctime>
#include <fstream>
#include <sstream>

#include "rig/uuid.h"
#include "rig/version.h"

namespace kp {
namespace {

constexpr const char* kPutBlockSql =
    "INSERT OR REPLACE INTO sample_blocks VALUES(?1,?2,?3,?4,?5,?6,?7,?8,?9,?10,?11,?12,?13,?14,?15,?16,?17,?18,?19,?20,?21,"
    "?22,?23,?24,?25,?26,?27)";

Status PutBlock(sql::Stmt& put, int64_t run_id, int64_t block, const SampleSummary& s) {
  put.Bind(1, run_id).Bind(2, block).Bind(3, s.count);
  put.Bind(4, s.first.t_s).Bind(5, s.first.voltage_v).Bind(6, s.first.current_a).Bind(7, s.first.temperature_c).Bind(8, s.first.step);
  put.Bind(9, s.last.t_s).Bind(10, s.last.voltage_v).Bind(11, s.last.current_a).Bind(12, s.last.temperature_c).Bind(13, s.last.step);
  put.Bind(14, s.net_mah).Bind(15, s.discharged_mah).Bind(16, s.charged_mah).Bind(17, s.since_charge_mah);
  put.Bind(18, static_cast<int64_t>(s.has_charge ? 1 : 0)).Bind(19, s.net_wh).Bind(20, s.discharged_wh).Bind(21, s.voltage_time_vs);
  put.Bind(22, s.min_voltage_v).Bind(23, s.max_voltage_v).Bind(24, s.min_current_a).Bind(25, s.max_current_a);
  put.Bind(26, s.min_temperature_c).Bind(27, s.max_temperature_c);
  Status st = put.Run();
  if (!st.ok()) put.Reset();
  return st;
}

constexpr const char* kBlockColumns =
    "SELECT block, sample_count, first_t_s, first_voltage_v, first_current_a, first_temperature_c, first_step,"
    " last_t_s, last_voltage_v, last_current_a, last_temperature_c, last_step, net_mah, discharged_mah, charged_mah,"
    " since_charge_mah, has_charge, net_wh, discharged_wh, voltage_time_vs, min_voltage_v, max_voltage_v, min_current_a,"
    " max_current_a, min_temperature_c, max_temperature_c FROM sample_blocks";

SampleBlock ReadBlock(const sql::Stmt& q) {
  SampleBlock b;
  b.index = q.Int(0);
  SampleSummary& s = b.summary;
  s.count = q.Int(1);
  s.first = Sample{q.Real(2), q.Real(3), q.Real(4), q.Real(5), static_cast<int>(q.Int(6))};
  s.last = Sample{q.Real(7), q.Real(8), q.Real(9), q.Real(10), static_cast<int>(q.Int(11))};
  s.net_mah = q.Real(12);
  s.discharged_mah = q.Real(13);
  s.charged_mah = q.Real(14);
  s.since_charge_mah = q.Real(15);
  s.has_charge = q.Int(16) != 0;
  s.net_wh = q.Real(17);
  s.discharged_wh = q.Real(18);
  s.voltage_time_vs = q.Real(19);
  s.min_voltage_v = q.Real(20);
  s.max_voltage_v = q.Real(21);
  s.min_current_a = q.Real(22);
  s.max_current_a = q.Real(23);
  s.min_temperature_c = q.Real(24);
  s.max_temperature_c = q.Real(25);
  return b;
}

// Schema migrations, one function per version step. Each runs inside the
// transaction that also bumps PRAGMA user_version.
Status MigrateTo1(sql::Db& db) {
  return db.Exec(R"sql(
    CREATE TABLE cells(
      id INTEGER PRIMARY KEY,
      name TEXT NOT NULL UNIQUE,
      chemistry TEXT NOT NULL,
      rated_mah REAL NOT NULL,
      created_at TEXT NOT NULL);
    CREATE TABLE runs(
      id INTEGER PRIMARY KEY,
      cell_id INTEGER NOT NULL REFERENCES cells(id),
      procedure_name TEXT NOT NULL,
      procedure_text TEXT NOT NULL,
      rig TEXT NOT NULL,
      rated_mah REAL NOT NULL,
      started_at TEXT NOT NULL,
      ended_at TEXT,
      outcome TEXT NOT NULL CHECK(outcome IN ('running','completed','aborted','interrupted')),
      reason TEXT NOT NULL DEFAULT '',
      runner_pid INTEGER,
      runner_host TEXT,
      heartbeat_at INTEGER);
    CREATE TABLE steps(
      run_id INTEGER NOT NULL REFERENCES runs(id),
      seq INTEGER NOT NULL,
      idx INTEGER NOT NULL,
      kind TEXT NOT NULL,
      label TEXT NOT NULL,
      started_s REAL NOT NULL,
      ended_s REAL,
      end_reason TEXT,
      PRIMARY KEY(run_id, seq)) WITHOUT ROWID;
    CREATE TABLE samples(
      run_id INTEGER NOT NULL,
      seq INTEGER NOT NULL,
      t_s REAL NOT NULL,
      voltage_v REAL NOT NULL,
      current_a REAL NOT NULL,
      temperature_c REAL NOT NULL,
      step INTEGER NOT NULL,
      PRIMARY KEY(run_id, seq)) WITHOUT ROWID;
    CREATE TABLE events(
      id INTEGER PRIMARY KEY,
      run_id INTEGER NOT NULL REFERENCES runs(id),
      t_s REAL NOT NULL,
      kind TEXT NOT NULL,
      message TEXT NOT NULL,
      wall_at TEXT NOT NULL);
    CREATE INDEX events_by_run ON events(run_id, id);
    CREATE TABLE requests(
      id INTEGER PRIMARY KEY,
      run_id INTEGER NOT NULL REFERENCES runs(id),
      action TEXT NOT NULL CHECK(action IN ('abort','pause','continue')),
      requested_by TEXT NOT NULL,
      requested_at TEXT NOT NULL,
      handled_at TEXT);
  )sql");
}

// v2: where a run stands (engine snapshot and delivered totals, committed with
// its samples) so an interrupted run can resume; the runner's process start
// token so a recycled pid is not taken for a live runner; a partial index for
// the requests a runner polls.
Status MigrateTo2(sql::Db& db) {
  return db.Exec(R"sql(
    ALTER TABLE runs ADD COLUMN engine_snapshot TEXT;
    ALTER TABLE runs ADD COLUMN progress_t_s REAL;
    ALTER TABLE runs ADD COLUMN delivered_mah REAL NOT NULL DEFAULT 0;
    ALTER TABLE runs ADD COLUMN delivered_wh REAL NOT NULL DEFAULT 0;
    ALTER TABLE runs ADD COLUMN runner_token TEXT;
    ALTER TABLE runs ADD COLUMN resumes INTEGER NOT NULL DEFAULT 0;
    CREATE INDEX requests_pending ON requests(run_id, id) WHERE handled_at IS NULL;
  )sql");
}

// v3: the commanded structure. Every step instance records its mode and
// commanded level, loop pass, cycle and the time it was held; DC-IR points
// the engine measured at commanded edges get their own table; the runs row
// carries the discharge figures (what the cell delivered in its latest
// discharge, and what was charged in) beside the net charge of the record,
// which keeps its value under the name net_mah. Old rows: the cycle is
// derived from the step kinds, mode and level are left NULL (the report
// takes them from the stored procedure) and `record` says 'migrated'.
Status MigrateTo3(sql::Db& db) {
  return db.Exec(R"sql(
    ALTER TABLE steps ADD COLUMN mode TEXT;
    ALTER TABLE steps ADD COLUMN level REAL;
    ALTER TABLE steps ADD COLUMN loop_pass INTEGER NOT NULL DEFAULT 0;
    ALTER TABLE steps ADD COLUMN cycle INTEGER NOT NULL DEFAULT 0;
    ALTER TABLE steps ADD COLUMN held_s REAL NOT NULL DEFAULT 0;
    ALTER TABLE steps ADD COLUMN record TEXT NOT NULL DEFAULT 'migrated';
    ALTER TABLE steps ADD COLUMN charge_mah REAL;
    ALTER TABLE steps ADD COLUMN energy_wh REAL;
    ALTER TABLE steps ADD COLUMN voltage_time_vs REAL;
    UPDATE steps SET cycle = (
      SELECT COUNT(*) FROM steps c WHERE c.run_id = steps.run_id AND c.seq <= steps.seq AND c.kind = 'charge'
        AND NOT EXISTS (SELECT 1 FROM steps p WHERE p.run_id = c.run_id AND p.seq = c.seq - 1 AND p.kind = 'charge'));
    CREATE TABLE dcir_points(
      run_id INTEGER NOT NULL REFERENCES runs(id),
      seq INTEGER NOT NULL,
      step_seq INTEGER NOT NULL,
      source TEXT NOT NULL,
      t_edge_s REAL NOT NULL,
      u1_v REAL NOT NULL, i1_a REAL NOT NULL, t1_s REAL NOT NULL,
      u2_v REAL, i2_a REAL, t2_s REAL,
      resistance_ohm REAL,
      valid INTEGER NOT NULL,
      why_invalid TEXT NOT NULL DEFAULT '',
      PRIMARY KEY(run_id, seq)) WITHOUT ROWID;
    ALTER TABLE runs RENAME COLUMN delivered_mah TO net_mah;
    ALTER TABLE runs RENAME COLUMN delivered_wh TO net_wh;
    ALTER TABLE runs ADD COLUMN delivered_mah REAL;
    ALTER TABLE runs ADD COLUMN delivered_wh REAL;
    ALTER TABLE runs ADD COLUMN charged_mah REAL;
    ALTER TABLE runs ADD COLUMN thermometer_tolerance_c REAL;
  )sql");
}

// v4: the number of committed samples on the runs row, kept in the same
// transaction as every batch, so listing or looking up a run costs the same
// whatever its length; and a summary of every kSamplesPerBlock samples
// (sample_blocks: first and last sample, integrals, channel ranges; see
// rig/sample_summary.h), kept with the batches too, from which the panel
// draws and counts a run without reading its samples. Both back-filled for
// the runs already stored.
Status MigrateTo4(sql::Db& db) {
  KP_RETURN_IF_ERROR(db.Exec(R"sql(
    ALTER TABLE runs ADD COLUMN sample_count INTEGER NOT NULL DEFAULT 0;
    UPDATE runs SET sample_count = (SELECT COUNT(*) FROM samples s WHERE s.run_id = runs.id);
    CREATE TABLE sample_blocks(
      run_id INTEGER NOT NULL,
      block INTEGER NOT NULL,
      sample_count INTEGER NOT NULL,
      first_t_s REAL NOT NULL, first_voltage_v REAL NOT NULL, first_current_a REAL NOT NULL,
      first_temperature_c REAL NOT NULL, first_step INTEGER NOT NULL,
      last_t_s REAL NOT NULL, last_voltage_v REAL NOT NULL, last_current_a REAL NOT NULL,
      last_temperature_c REAL NOT NULL, last_step INTEGER NOT NULL,
      net_mah REAL NOT NULL, discharged_mah REAL NOT NULL, charged_mah REAL NOT NULL, since_charge_mah REAL NOT NULL,
      has_charge INTEGER NOT NULL, net_wh REAL NOT NULL, discharged_wh REAL NOT NULL, voltage_time_vs REAL NOT NULL,
      min_voltage_v REAL NOT NULL, max_voltage_v REAL NOT NULL, min_current_a REAL NOT NULL, max_current_a REAL NOT NULL,
      min_temperature_c REAL NOT NULL, max_temperature_c REAL NOT NULL,
      PRIMARY KEY(run_id, block)) WITHOUT ROWID;
  )sql"));
  KP_ASSIGN_OR_RETURN(auto put, db.Prepare(kPutBlockSql));
  KP_ASSIGN_OR_RETURN(auto q, db.Prepare("SELECT run_id, seq, t_s, voltage_v, current_a, temperature_c, step FROM samples ORDER BY run_id, seq"));
  int64_t run = -1, block = -1;
  SampleSummary sum;
  auto flush = [&]() -> Status {
    if (sum.empty()) return Status::Ok();
    return PutBlock(put, run, block, sum);
  };
  for (;;) {
    KP_ASSIGN_OR_RETURN(bool row, q.Step());
    if (!row) break;
    const int64_t r = q.Int(0), b = q.Int(1) / kSamplesPerBlock;
    if (r != run || b != block) {
      KP_RETURN_IF_ERROR(flush());
      sum = SampleSummary{};
      run = r;
      block = b;
    }
    sum.Add(Sample{q.Real(2), q.Real(3), q.Real(4), q.Real(5), static_cast<int>(q.Int(6))});
  }
  return flush();
}

// v5: the traceable record. Each run gets a random UUID (drawn here for the
// runs already stored), the bench, host and operator, the cell's serial, lot
// and part number, tags (run_tags), the capacity verdict recorded at its end,
// the rig file's text, the software version and commit, and one row per
// instrument (instruments: *IDN?, profile, calibration). heartbeat_at keeps
// its meaning (Unix seconds, fractional); heartbeat_utc shows it as ISO 8601.
// Views for readers outside the program: run_summary, step_summary,
// cycle_summary (documented in rig/DATABASE.md). The database is marked as
// Kneepoint's with PRAGMA application_id.
constexpr const char* kViewsV5 = R"sql(
    CREATE VIEW run_summary AS
      SELECT r.id AS run, r.uuid, c.name AS cell, c.chemistry, r.cell_serial, r.cell_lot, r.cell_part,
        (SELECT group_concat(tag, ',') FROM (SELECT tag FROM run_tags t WHERE t.run_id = r.id ORDER BY tag)) AS tags,
        r.operator, r.bench, r.host, r.procedure_name AS procedure, r.rig, r.started_at, r.ended_at, r.outcome, r.reason,
        r.rated_mah, r.delivered_mah, r.delivered_wh,
        CASE WHEN r.delivered_mah IS NOT NULL AND r.rated_mah > 0 THEN 100.0 * r.delivered_mah / r.rated_mah END
          AS delivered_pct_of_rated,
        r.charged_mah, r.net_mah, r.net_wh, r.progress_t_s AS run_time_s, r.sample_count AS samples, r.resumes,
        r.verdict, r.verdict_pct_of_rated, r.verdict_text, r.software_version, r.software_commit
      FROM runs r JOIN cells c ON c.id = r.cell_id;
    CREATE VIEW step_summary AS
      SELECT s.run_id AS run, s.seq, s.idx + 1 AS step_number, s.kind, s.label, s.mode, s.level,
        CASE s.mode WHEN 'current' THEN 'A' WHEN 'charge' THEN 'A' WHEN 'power' THEN 'W' WHEN 'resistance' THEN 'Ohm' END
          AS level_unit,
        s.loop_pass AS pass, s.cycle, s.started_s, s.ended_s, s.ended_s - s.started_s AS duration_s, s.held_s,
        s.end_reason, s.charge_mah, s.energy_wh,
        CASE WHEN s.ended_s > s.started_s THEN s.charge_mah * 3.6 / (s.ended_s - s.started_s) END AS mean_current_a,
        CASE WHEN s.ended_s > s.started_s THEN s.voltage_time_vs / (s.ended_s - s.started_s) END AS mean_voltage_v,
        s.record
      FROM steps s;
    CREATE VIEW cycle_summary AS
      SELECT run, cycle, steps, started_s, ended_s, charge_in_mah, charge_in_wh, discharged_mah, discharged_wh,
        CASE WHEN charge_in_mah > 0 AND discharged_mah > 0 THEN discharged_mah / charge_in_mah END AS coulombic_efficiency,
        CASE WHEN charge_in_wh > 0 AND discharged_wh > 0 THEN discharged_wh / charge_in_wh END AS energy_efficiency
      FROM (SELECT run_id AS run, cycle, COUNT(*) AS steps, MIN(started_s) AS started_s, MAX(ended_s) AS ended_s,
              SUM(CASE WHEN kind = 'charge' AND charge_mah < 0 THEN -charge_mah ELSE 0 END) AS charge_in_mah,
              SUM(CASE WHEN kind = 'charge' AND energy_wh < 0 THEN -energy_wh ELSE 0 END) AS charge_in_wh,
              SUM(CASE WHEN kind <> 'charge' AND charge_mah > 0 THEN charge_mah ELSE 0 END) AS discharged_mah,
              SUM(CASE WHEN kind <> 'charge' AND energy_wh > 0 THEN energy_wh ELSE 0 END) AS discharged_wh
            FROM steps GROUP BY run_id, cycle);
)sql";

Status MigrateTo5(sql::Db& db) {
  KP_RETURN_IF_ERROR(db.Exec(R"sql(
    ALTER TABLE runs ADD COLUMN uuid TEXT;
    ALTER TABLE runs ADD COLUMN bench TEXT NOT NULL DEFAULT '';
    ALTER TABLE runs ADD COLUMN host TEXT NOT NULL DEFAULT '';
    ALTER TABLE runs ADD COLUMN operator TEXT NOT NULL DEFAULT '';
    ALTER TABLE runs ADD COLUMN cell_serial TEXT NOT NULL DEFAULT '';
    ALTER TABLE runs ADD COLUMN cell_lot TEXT NOT NULL DEFAULT '';
    ALTER TABLE runs ADD COLUMN cell_part TEXT NOT NULL DEFAULT '';
    ALTER TABLE runs ADD COLUMN rig_text TEXT NOT NULL DEFAULT '';
    ALTER TABLE runs ADD COLUMN software_version TEXT NOT NULL DEFAULT '';
    ALTER TABLE runs ADD COLUMN software_commit TEXT NOT NULL DEFAULT '';
    ALTER TABLE runs ADD COLUMN verdict TEXT CHECK(verdict IN ('pass','fail','not judged'));
    ALTER TABLE runs ADD COLUMN verdict_text TEXT;
    ALTER TABLE runs ADD COLUMN verdict_pct_of_rated REAL;
    ALTER TABLE runs ADD COLUMN heartbeat_utc TEXT GENERATED ALWAYS AS
      (CASE WHEN heartbeat_at IS NULL THEN NULL ELSE strftime('%Y-%m-%dT%H:%M:%fZ', heartbeat_at, 'unixepoch') END) VIRTUAL;
    UPDATE runs SET host = COALESCE(runner_host, '');
    CREATE INDEX runs_by_started ON runs(started_at);
    CREATE TABLE run_tags(
      run_id INTEGER NOT NULL REFERENCES runs(id),
      tag TEXT NOT NULL,
      PRIMARY KEY(run_id, tag)) WITHOUT ROWID;
    CREATE INDEX run_tags_by_tag ON run_tags(tag);
    CREATE TABLE instruments(
      run_id INTEGER NOT NULL REFERENCES runs(id),
      seq INTEGER NOT NULL,
      name TEXT NOT NULL, roles TEXT NOT NULL, address TEXT NOT NULL, profile TEXT NOT NULL,
      identity TEXT NOT NULL, manufacturer TEXT NOT NULL, model TEXT NOT NULL, serial TEXT NOT NULL, firmware TEXT NOT NULL,
      voltage_gain REAL NOT NULL, voltage_offset_v REAL NOT NULL,
      current_gain REAL NOT NULL, current_offset_a REAL NOT NULL,
      temperature_gain REAL NOT NULL, temperature_offset_c REAL NOT NULL,
      calibrated_on TEXT NOT NULL DEFAULT '',
      PRIMARY KEY(run_id, seq)) WITHOUT ROWID;
  )sql"));
  KP_RETURN_IF_ERROR(db.Exec(kViewsV5));
  // Runs stored before v5 get their UUID now: unique from here on, whatever
  // databases they are later copied into.
  std::vector<int64_t> ids;
  {
    KP_ASSIGN_OR_RETURN(auto q, db.Prepare("SELECT id FROM runs WHERE uuid IS NULL ORDER BY id"));
    for (;;) {
      KP_ASSIGN_OR_RETURN(bool row, q.Step());
      if (!row) break;
      ids.push_back(q.Int(0));
    }
  }
  KP_ASSIGN_OR_RETURN(auto up, db.Prepare("UPDATE runs SET uuid=?1 WHERE id=?2"));
  for (int64_t id : ids) {
    KP_ASSIGN_OR_RETURN(std::string uuid, NewUuidV4());
    KP_RETURN_IF_ERROR(up.Bind(1, uuid).Bind(2, id).Run());
  }
  return db.Exec(fmt::format("CREATE UNIQUE INDEX runs_by_uuid ON runs(uuid); PRAGMA application_id={};", kApplicationId));
}

using Migration = Status (*)(sql::Db&);
constexpr Migration kMigrations[] = {&MigrateTo1, &MigrateTo2, &MigrateTo3, &MigrateTo4, &MigrateTo5};
static_assert(std::size(kMigrations) == kSchemaVersion);

// Heartbeats are calendar time (they must compare across processes), with
// sub-second resolution so short gaps are measured.
double UnixSeconds() {
  return std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
}

std::string HostName() {
  char buf[256] = {0};
  if (gethostname(buf, sizeof buf - 1) != 0) return "unknown";
  return buf;
}

// Fields of /proc/<pid>/stat after the command name: state (field 3) and the
// start time in clock ticks since boot (field 22). Empty where /proc is absent.
struct ProcStat {
  char state = '?';
  std::string start_token;
};

std::optional<ProcStat> ReadProcStat(int64_t pid) {
  std::ifstream in(fmt::format("/proc/{}/stat", pid));
  if (!in) return std::nullopt;
  std::string line;
  std::getline(in, line);
  size_t close = line.rfind(')');
  if (close == std::string::npos) return std::nullopt;
  std::istringstream rest(line.substr(close + 1));
  ProcStat st;
  std::string field;
  for (int i = 3; i <= 22 && (rest >> field); ++i) {
    if (i == 3) st.state = field.empty() ? '?' : field[0];
    if (i == 22) st.start_token = field;
  }
  return st;
}

std::string ProcessStartToken(int64_t pid) {
  auto st = ReadProcStat(pid);
  return st ? st->start_token : std::string();
}

// A runner is alive when its pid exists, is not a zombie and, where the start
// token was recorded, started at the same moment (not a recycled pid).
bool RunnerAlive(int64_t pid, const std::string& token) {
  if (pid <= 0) return false;
  if (kill(static_cast<pid_t>(pid), 0) != 0 && errno != EPERM) return false;
  auto st = ReadProcStat(pid);
  if (!st) return true;  // no /proc: the pid check is all we have
  if (st->state == 'Z' || st->state == 'X') return false;
  return token.empty() || token == st->start_token;
}

}  // namespace

const char* OutcomeName(Outcome o) {
  switch (o) {
    case Outcome::kRunning: return "running";
    case Outcome::kCompleted: return "completed";
    case Outcome::kAborted: return "aborted";
    case Outcome::kInterrupted: return "interrupted";
  }
  return "?";
}

std::optional<Outcome> ParseOutcome(std::string_view s) {
  for (Outcome o : {Outcome::kRunning, Outcome::kCompleted, Outcome::kAborted, Outcome::kInterrupted}) {
    if (s == OutcomeName(o)) return o;
  }
  return std::nullopt;
}

Store::Store(std::unique_ptr<sql::Db> db, Clock& wall, Options options)
    : db_(std::move(db)), wall_(wall), options_(options) {}

Store::~Store() {
  if (in_batch_ || !staged_.empty()) (void)Commit();
}

namespace {
Status NewerSchemaError(const std::string& path, int version) {
  return InvalidInput(fmt::format("{} has schema version {}, newer than this kneepoint understands ({}); use a newer kneepoint", path,
                                  version, kSchemaVersion));
}
}  // namespace

Result<std::unique_ptr<Store>> Store::Open(const std::string& path, Clock& wall, Options options) {
  KP_ASSIGN_OR_RETURN(auto db, sql::Db::Open(path, options.create && !options.read_only, options.read_only, options.vfs));
  std::unique_ptr<Store> store(new Store(std::move(db), wall, options));
  KP_ASSIGN_OR_RETURN(int app, store->ApplicationId());
  if (app != 0 && app != kApplicationId)
    return InvalidInput(fmt::format("{} is not a kneepoint database (PRAGMA application_id is 0x{:08x}, kneepoint's is 0x{:08x})", path,
                                    static_cast<uint32_t>(app), static_cast<uint32_t>(kApplicationId)));
  KP_ASSIGN_OR_RETURN(int v, store->SchemaVersion());
  if (v > kSchemaVersion) {
    if (!options.read_only_if_newer)
      return NewerSchemaError(path, v);
    if (!options.read_only) {
      store.reset();
      Options ro = options;
      ro.read_only = true;
      return Open(path, wall, ro);
    }
    store->newer_schema_ = v;
    return store;
  }
  if (!options.read_only) {
    // Switching a new file to WAL takes an exclusive lock, and SQLite answers
    // "locked" at once (no busy wait) while another connection opening the
    // same new file holds a lock: try again for up to about 5 s.
    Status setup = Status::Ok();
    for (int attempt = 0; attempt < 1000; ++attempt) {
      setup = store->db_->Exec("PRAGMA journal_mode=WAL; PRAGMA synchronous=FULL; PRAGMA foreign_keys=ON;");
      if (setup.code() != StatusCode::kUnavailable) break;
      ::usleep(5000);
    }
    KP_RETURN_IF_ERROR(setup.WithContext("setting up " + path));
    KP_RETURN_IF_ERROR(store->Migrate());
  } else if (v != kSchemaVersion) {
    return InvalidInput(fmt::format("{}: schema version {} (this kneepoint reads {}); open it read-write once to upgrade", path, v,
                                    kSchemaVersion));
  }
  return store;
}

Result<int> Store::ApplicationId() {
  KP_ASSIGN_OR_RETURN(auto st, db_->Prepare("PRAGMA application_id"));
  KP_ASSIGN_OR_RETURN(bool row, st.Step());
  return row ? static_cast<int>(st.Int(0)) : 0;
}

Result<int> Store::SchemaVersion() {
  KP_ASSIGN_OR_RETURN(auto st, db_->Prepare("PRAGMA user_version"));
  KP_ASSIGN_OR_RETURN(bool row, st.Step());
  return row ? static_cast<int>(st.Int(0)) : 0;
}

Result<std::string> Store::JournalMode() {
  KP_ASSIGN_OR_RETURN(auto st, db_->Prepare("PRAGMA journal_mode"));
  KP_ASSIGN_OR_RETURN(bool row, st.Step());
  return row ? st.Text(0) : std::string();
}

Status Store::Migrate() {
  KP_ASSIGN_OR_RETURN(int version, SchemaVersion());
  if (version > kSchemaVersion) {
    return NewerSchemaError(db_->path(), version);
  }
  while (version < kSchemaVersion) {
    KP_RETURN_IF_ERROR(db_->Exec("BEGIN IMMEDIATE"));
    // Another connection (a second process opening the new file at the same
    // moment) may have migrated since the version was read: read it again
    // under the write lock and apply only what is still missing.
    Result<int> now = SchemaVersion();
    if (!now.ok() || *now != version) {
      (void)db_->Exec(now.ok() ? "COMMIT" : "ROLLBACK");
      if (!now.ok()) return now.status().WithContext(fmt::format("migrating {}", db_->path()));
      if (*now > kSchemaVersion)
        return NewerSchemaError(db_->path(), *now);
      version = *now;
      continue;
    }
    Status st = kMigrations[version](*db_);
    if (st.ok()) st = db_->Exec(fmt::format("PRAGMA user_version={}", version + 1));
    if (st.ok()) st = db_->Exec("COMMIT");
    if (!st.ok()) {
      (void)db_->Exec("ROLLBACK");
      return st.WithContext(fmt::format("migrating {} to schema version {}", db_->path(), version + 1));
    }
    ++version;
  }
  return Status::Ok();
}

Status Store::EnsureBatch() {
  if (in_batch_) return Status::Ok();
  KP_RETURN_IF_ERROR(db_->Exec("BEGIN IMMEDIATE"));
  in_batch_ = true;
  if (staged_.empty()) batch_started_ = wall_.Now();
  return Status::Ok();
}

Status Store::FlushStaged() {
  if (staged_.empty()) return Status::Ok();
  Status st = EnsureBatch();
  for (size_t i = 0; st.ok() && i < staged_.size(); ++i) st = WriteSample(staged_[i]);
  staged_.clear();
  return st;
}

Status Store::CommitGroup::Close() {
  if (store_ == nullptr) return Status::Ok();
  Store& s = *store_;
  store_ = nullptr;
  if (--s.group_depth_ > 0 || !s.group_commit_) return Status::Ok();
  s.group_commit_ = false;
  return s.Commit();
}

Status Store::Commit() {
  if (!in_batch_ && staged_.empty()) return Status::Ok();
  if (group_depth_ > 0) {
    group_commit_ = true;  // made when the outermost group closes
    return Status::Ok();
  }
  // A heartbeat in the same transaction tells readers the runner is alive.
  // So does the run's progress, which therefore always matches the samples.
  Status st = FlushStaged();
  if (st.ok() && seq_run_ >= 0 && block_dirty_) st = WriteBlock();
  if (st.ok() && seq_run_ >= 0) {
    if (!has_heartbeat_) {
      auto hb = db_->Prepare(
          "UPDATE runs SET heartbeat_at=?1, engine_snapshot=COALESCE(?3, engine_snapshot), progress_t_s=COALESCE(?4, progress_t_s),"
          " net_mah=COALESCE(?5, net_mah), net_wh=COALESCE(?6, net_wh), sample_count=sample_count+?7,"
          " delivered_mah=COALESCE(?8, delivered_mah), delivered_wh=COALESCE(?9, delivered_wh),"
          " charged_mah=COALESCE(?10, charged_mah) WHERE id=?2");
      st = hb.status();
      if (st.ok()) {
        heartbeat_ = std::move(*hb);
        has_heartbeat_ = true;
      }
    }
    if (st.ok()) {
      // The engine snapshot is formatted here, once per commit, not per sample.
      if (progress_ && snapshot_fn_) progress_->engine_snapshot = snapshot_fn_();
      snapshot_fn_ = nullptr;
      heartbeat_.Bind(1, UnixSeconds()).Bind(2, seq_run_).Bind(7, next_seq_ - committed_seq_);
      if (progress_) {
        heartbeat_.Bind(3, progress_->engine_snapshot)
            .Bind(4, progress_->t_s)
            .Bind(5, progress_->delivered_mah)
            .Bind(6, progress_->delivered_wh)
            .Bind(8, progress_->discharge_mah)
            .Bind(9, progress_->discharge_wh)
            .Bind(10, progress_->charged_mah);
      }
      st = heartbeat_.Run();
      if (!st.ok()) heartbeat_.Reset();
    }
  }
  if (st.ok()) st = db_->Exec("COMMIT");
  if (!st.ok()) {
    // Nothing of the batch becomes visible; the caller stops the run.
    if (!sqlite3_get_autocommit(db_->raw())) (void)db_->Exec("ROLLBACK");
    in_batch_ = false;
    // Back to what the database holds, so a later commit cannot pair the
    // rolled-back progress with the older samples.
    next_seq_ = committed_seq_;
    progress_ = committed_progress_;
    snapshot_fn_ = nullptr;
    block_ = committed_block_;
    block_index_ = committed_block_index_;
    block_dirty_ = false;
    return st.WithContext("committing samples");
  }
  in_batch_ = false;
  if (seq_run_ >= 0) {
    committed_seq_ = next_seq_;
    committed_progress_ = progress_;
    committed_block_ = block_;
    committed_block_index_ = block_index_;
  }
  return Status::Ok();
}

Status Store::MaybeCommit() {
  if ((in_batch_ || !staged_.empty()) && (wall_.Now() - batch_started_).count() >= options_.commit_interval_s) return Commit();
  return Status::Ok();
}

Result<int64_t> Store::EnsureCell(const NewRun& run) {
  KP_ASSIGN_OR_RETURN(auto find, db_->Prepare("SELECT id FROM cells WHERE name=?1"));
  find.Bind(1, run.cell_name);
  KP_ASSIGN_OR_RETURN(bool row, find.Step());
  if (row) return find.Int(0);
  KP_ASSIGN_OR_RETURN(auto ins, db_->Prepare("INSERT INTO cells(name, chemistry, rated_mah, created_at) VALUES(?1,?2,?3,?4)"));
  KP_RETURN_IF_ERROR(ins.Bind(1, run.cell_name).Bind(2, run.chemistry).Bind(3, run.rated_mah).Bind(4, wall_.WallTimeIso()).Run());
  return static_cast<int64_t>(sqlite3_last_insert_rowid(db_->raw()));
}

Result<int64_t> Store::BeginRun(const NewRun& run) { return BeginRunWith(run, std::nullopt); }

Result<int64_t> Store::BeginRun(const NewRun& run, const RunProgress& initial) { return BeginRunWith(run, initial); }

Result<int64_t> Store::BeginRunWith(const NewRun& run, const std::optional<RunProgress>& initial) {
  KP_RETURN_IF_ERROR(Commit());
  KP_RETURN_IF_ERROR(EnsureBatch());
  KP_ASSIGN_OR_RETURN(int64_t cell_id, EnsureCell(run));
  KP_ASSIGN_OR_RETURN(auto ins, db_->Prepare(
                                    "INSERT INTO runs(cell_id, procedure_name, procedure_text, rig, rated_mah, started_at, outcome,"
                                    " thermometer_tolerance_c) VALUES(?1,?2,?3,?4,?5,?6,'running',?7)"));
  if (run.thermometer_tolerance_c) ins.Bind(7, *run.thermometer_tolerance_c);
  KP_RETURN_IF_ERROR(ins.Bind(1, cell_id)
                         .Bind(2, run.procedure_name)
                         .Bind(3, run.procedure_text)
                         .Bind(4, run.rig)
                         .Bind(5, run.rated_mah)
                         .Bind(6, wall_.WallTimeIso())
                         .Run());
  int64_t id = sqlite3_last_insert_rowid(db_->raw());
  KP_RETURN_IF_ERROR(ClaimRunner(id));
  KP_RETURN_IF_ERROR(WriteRecord(id, run));
  seq_run_ = id;
  next_seq_ = 0;
  committed_seq_ = 0;
  step_seq_ = 0;
  progress_ = initial;
  committed_progress_.reset();
  snapshot_fn_ = nullptr;
  block_ = committed_block_ = SampleSummary{};
  block_index_ = committed_block_index_ = -1;
  block_dirty_ = false;
  KP_RETURN_IF_ERROR(Commit());
  return id;
}

// The traceable record of a new run, in its BeginRun transaction.
Status Store::WriteRecord(int64_t id, const NewRun& run) {
  std::string uuid = run.uuid;
  if (uuid.empty()) {
    KP_ASSIGN_OR_RETURN(uuid, NewUuidV4());
  } else if (!LooksLikeUuid(uuid)) {
    return InvalidInput(fmt::format("'{}' is not a UUID", uuid));
  }
  KP_ASSIGN_OR_RETURN(auto up, db_->Prepare("UPDATE runs SET uuid=?1, bench=?2, host=?3, operator=?4, cell_serial=?5, cell_lot=?6,"
                                            " cell_part=?7, rig_text=?8, software_version=?9, software_commit=?10 WHERE id=?11"));
  up.Bind(1, uuid).Bind(2, run.bench).Bind(3, run.host.empty() ? HostName() : run.host).Bind(4, run.operator_name);
  up.Bind(5, run.cell_serial).Bind(6, run.cell_lot).Bind(7, run.cell_part).Bind(8, run.rig_text);
  up.Bind(9, run.software_version.empty() ? std::string(SoftwareVersion()) : run.software_version);
  KP_RETURN_IF_ERROR(up.Bind(10, run.software_commit.empty() ? BuildCommit() : run.software_commit).Bind(11, id).Run());
  if (!run.tags.empty()) {
    KP_ASSIGN_OR_RETURN(auto tag, db_->Prepare("INSERT OR IGNORE INTO run_tags(run_id, tag) VALUES(?1,?2)"));
    for (const std::string& t : run.tags) KP_RETURN_IF_ERROR(tag.Bind(1, id).Bind(2, t).Run());
  }
  if (!run.instruments.empty()) {
    KP_ASSIGN_OR_RETURN(auto ins, db_->Prepare("INSERT INTO instruments VALUES(?1,?2,?3,?4,?5,?6,?7,?8,?9,?10,?11,?12,?13,?14,?15,?16,?17,?18)"));
    int64_t seq = 0;
    for (const InstrumentRecord& r : run.instruments) {
      ins.Bind(1, id).Bind(2, seq++).Bind(3, r.name).Bind(4, r.roles).Bind(5, r.address).Bind(6, r.profile).Bind(7, r.identity);
      ins.Bind(8, r.manufacturer).Bind(9, r.model).Bind(10, r.serial).Bind(11, r.firmware);
      ins.Bind(12, r.voltage_gain).Bind(13, r.voltage_offset_v).Bind(14, r.current_gain).Bind(15, r.current_offset_a);
      KP_RETURN_IF_ERROR(ins.Bind(16, r.temperature_gain).Bind(17, r.temperature_offset_c).Bind(18, r.calibrated_on).Run());
    }
  }
  if (!run.note.empty()) {
    KP_ASSIGN_OR_RETURN(auto ev, db_->Prepare("INSERT INTO events(run_id, t_s, kind, message, wall_at) VALUES(?1,0,'note',?2,?3)"));
    KP_RETURN_IF_ERROR(ev.Bind(1, id).Bind(2, run.note).Bind(3, wall_.WallTimeIso()).Run());
  }
  return Status::Ok();
}

Status Store::ClaimRunner(int64_t run_id) {
  KP_ASSIGN_OR_RETURN(auto up, db_->Prepare("UPDATE runs SET runner_pid=?1, runner_host=?2, runner_token=?3, heartbeat_at=?4 WHERE id=?5"));
  const int64_t pid = getpid();
  return up.Bind(1, pid).Bind(2, HostName()).Bind(3, ProcessStartToken(pid)).Bind(4, UnixSeconds()).Bind(5, run_id).Run();
}

Result<ReopenedRun> Store::ReopenRun(int64_t run_id) {
  KP_RETURN_IF_ERROR(Commit());
  KP_RETURN_IF_ERROR(ReconcileOrphans().status());
  KP_RETURN_IF_ERROR(EnsureBatch());
  auto body = [&]() -> Result<ReopenedRun> {
    KP_ASSIGN_OR_RETURN(auto q, db_->Prepare("SELECT outcome, COALESCE(heartbeat_at,0), resumes FROM runs WHERE id=?1"));
    q.Bind(1, run_id);
    KP_ASSIGN_OR_RETURN(bool row, q.Step());
    if (!row) return NotFound(fmt::format("no run {} in {}", run_id, db_->path()));
    std::string outcome = q.Text(0);
    if (outcome != "interrupted") {
      return InvalidInput(fmt::format("run {} is {}; only an interrupted run can be resumed{}", run_id, outcome,
                                      outcome == "running" ? " (its runner is still alive)" : ""));
    }
    ReopenedRun out;
    out.gap_s = std::max(0.0, UnixSeconds() - q.Real(1));
    out.resumes = static_cast<int>(q.Int(2));
    KP_ASSIGN_OR_RETURN(out.progress, LoadProgress(run_id));
    if (!out.progress) {
      return InvalidInput(fmt::format("run {} stopped before its first commit; there is nothing to resume from — start a new run",
                                      run_id));
    }
    KP_ASSIGN_OR_RETURN(auto last, db_->Prepare("SELECT seq, t_s, voltage_v, current_a, temperature_c, step FROM samples"
                                                " WHERE run_id=?1 ORDER BY seq DESC LIMIT 1"));
    last.Bind(1, run_id);
    KP_ASSIGN_OR_RETURN(bool has_last, last.Step());
    if (has_last) {
      out.next_seq = last.Int(0) + 1;
      out.last_sample = Sample{last.Real(1), last.Real(2), last.Real(3), last.Real(4), static_cast<int>(last.Int(5))};
    }
    KP_ASSIGN_OR_RETURN(auto steps, db_->Prepare("SELECT COALESCE(MAX(seq)+1, 0) FROM steps WHERE run_id=?1"));
    steps.Bind(1, run_id);
    KP_RETURN_IF_ERROR(steps.Step().status());
    const int64_t step_seq = steps.Int(0);
    // The count is re-taken from the samples once per resume, so the run
    // continues from a count that matches its rows whatever wrote them.
    KP_ASSIGN_OR_RETURN(auto up, db_->Prepare("UPDATE runs SET outcome='running', reason='', ended_at=NULL, resumes=resumes+1,"
                                              " sample_count=(SELECT COUNT(*) FROM samples s WHERE s.run_id=?1) WHERE id=?1"));
    KP_RETURN_IF_ERROR(up.Bind(1, run_id).Run());
    KP_RETURN_IF_ERROR(ClaimRunner(run_id));
    seq_run_ = run_id;
    next_seq_ = out.next_seq;
    committed_seq_ = out.next_seq;
    step_seq_ = step_seq;
    progress_ = out.progress;
    committed_progress_ = out.progress;
    snapshot_fn_ = nullptr;
    // The block the next sample falls in continues from its stored summary.
    block_ = SampleSummary{};
    block_index_ = -1;
    block_dirty_ = false;
    KP_ASSIGN_OR_RETURN(auto blocks, LoadBlocks(run_id, out.next_seq / kSamplesPerBlock, 1));
    if (!blocks.empty() && blocks[0].index == out.next_seq / kSamplesPerBlock) {
      block_ = blocks[0].summary;
      block_index_ = blocks[0].index;
    }
    committed_block_ = block_;
    committed_block_index_ = block_index_;
    return out;
  };
  Result<ReopenedRun> r = body();
  if (!r.ok()) {
    (void)db_->Exec("ROLLBACK");
    in_batch_ = false;
    seq_run_ = -1;
    return r.status();
  }
  KP_RETURN_IF_ERROR(Commit());
  return r;
}

void Store::SetProgress(int64_t run_id, RunProgress progress) {
  if (run_id != seq_run_) return;
  progress_ = std::move(progress);
  snapshot_fn_ = nullptr;
}

void Store::SetProgress(int64_t run_id, const ProgressFigures& figures, std::function<std::string()> snapshot) {
  if (run_id != seq_run_) return;
  if (!progress_) progress_.emplace();
  progress_->t_s = figures.t_s;
  progress_->delivered_mah = figures.delivered_mah;
  progress_->delivered_wh = figures.delivered_wh;
  progress_->discharge_mah = figures.discharge_mah;
  progress_->discharge_wh = figures.discharge_wh;
  progress_->charged_mah = figures.charged_mah;
  progress_->discharge_open = figures.discharge_open;
  snapshot_fn_ = std::move(snapshot);
}

Status Store::AppendSample(int64_t run_id, const Sample& s) {
  KP_RETURN_IF_ERROR(StageSample(run_id, s));
  return MaybeCommit();
}

Status Store::StageSample(int64_t run_id, const Sample& s) {
  if (run_id != seq_run_) return InvalidInput(fmt::format("run {} is not the run this store is writing", run_id));
  if (!in_batch_ && staged_.empty()) batch_started_ = wall_.Now();
  staged_.push_back(s);
  return Status::Ok();
}

Status Store::WriteSample(const Sample& s) {
  const int64_t run_id = seq_run_;
  if (!has_insert_) {
    KP_ASSIGN_OR_RETURN(insert_sample_, db_->Prepare("INSERT INTO samples(run_id, seq, t_s, voltage_v, current_a, temperature_c, step)"
                                                     " VALUES(?1,?2,?3,?4,?5,?6,?7)"));
    has_insert_ = true;
  }
  const int64_t block = next_seq_ / kSamplesPerBlock;
  if (block != block_index_) {
    // The previous block is complete: its summary goes into this batch.
    if (block_index_ >= 0 && block_dirty_) KP_RETURN_IF_ERROR(WriteBlock());
    block_ = SampleSummary{};
    block_index_ = block;
  }
  block_.Add(s);
  block_dirty_ = true;
  KP_RETURN_IF_ERROR(insert_sample_.Bind(1, run_id)
                         .Bind(2, next_seq_)
                         .Bind(3, s.t_s)
                         .Bind(4, s.voltage_v)
                         .Bind(5, s.current_a)
                         .Bind(6, s.temperature_c)
                         .Bind(7, s.step)
                         .Run());
  ++next_seq_;
  return Status::Ok();
}

Status Store::WriteBlock() {
  if (!has_put_block_) {
    KP_ASSIGN_OR_RETURN(put_block_, db_->Prepare(kPutBlockSql));
    has_put_block_ = true;
  }
  KP_RETURN_IF_ERROR(PutBlock(put_block_, seq_run_, block_index_, block_));
  block_dirty_ = false;
  return Status::Ok();
}

Status Store::BeginStep(int64_t run_id, const NewStep& step, double t_s) {
  KP_RETURN_IF_ERROR(EnsureBatch());
  KP_ASSIGN_OR_RETURN(auto ins, db_->Prepare("INSERT INTO steps(run_id, seq, idx, kind, label, started_s, mode, level, loop_pass,"
                                             " cycle, record) VALUES(?1,?2,?3,?4,?5,?6,?7,?8,?9,?10,'engine')"));
  ins.Bind(1, run_id).Bind(2, step_seq_).Bind(3, step.index).Bind(4, step.kind).Bind(5, step.label).Bind(6, t_s).Bind(7, step.mode);
  if (step.level) ins.Bind(8, *step.level);
  KP_RETURN_IF_ERROR(ins.Bind(9, static_cast<int64_t>(step.pass)).Bind(10, static_cast<int64_t>(step.cycle)).Run());
  ++step_seq_;
  return Commit();
}

Status Store::NoteStepHeld(int64_t run_id, double held_s) {
  if (step_seq_ == 0) return Status::Ok();
  KP_RETURN_IF_ERROR(EnsureBatch());
  KP_ASSIGN_OR_RETURN(auto up, db_->Prepare("UPDATE steps SET held_s=held_s+?1 WHERE run_id=?2 AND seq=?3"));
  return up.Bind(1, held_s).Bind(2, run_id).Bind(3, step_seq_ - 1).Run();
}

Status Store::AddDcirPoint(int64_t run_id, const DcirRow& p) {
  KP_RETURN_IF_ERROR(EnsureBatch());
  KP_ASSIGN_OR_RETURN(auto ins, db_->Prepare("INSERT INTO dcir_points(run_id, seq, step_seq, source, t_edge_s, u1_v, i1_a, t1_s,"
                                             " u2_v, i2_a, t2_s, resistance_ohm, valid, why_invalid)"
                                             " VALUES(?1,(SELECT COALESCE(MAX(seq)+1,0) FROM dcir_points WHERE run_id=?1),"
                                             " ?2,?3,?4,?5,?6,?7,?8,?9,?10,?11,?12,?13)"));
  ins.Bind(1, run_id).Bind(2, step_seq_ > 0 ? step_seq_ - 1 : 0).Bind(3, p.source).Bind(4, p.t_edge_s);
  ins.Bind(5, p.u1_v).Bind(6, p.i1_a).Bind(7, p.t1_s);
  if (p.t2_s) ins.Bind(8, p.u2_v).Bind(9, p.i2_a).Bind(10, *p.t2_s);
  if (p.valid) ins.Bind(11, p.resistance_ohm);
  return ins.Bind(12, static_cast<int64_t>(p.valid ? 1 : 0)).Bind(13, p.why_invalid).Run();
}

Result<std::vector<DcirRow>> Store::LoadDcirPoints(int64_t run_id) {
  KP_ASSIGN_OR_RETURN(auto q, db_->Prepare("SELECT step_seq, source, t_edge_s, u1_v, i1_a, t1_s, u2_v, i2_a, t2_s, resistance_ohm,"
                                           " valid, why_invalid FROM dcir_points WHERE run_id=?1 ORDER BY seq"));
  q.Bind(1, run_id);
  std::vector<DcirRow> out;
  for (;;) {
    KP_ASSIGN_OR_RETURN(bool row, q.Step());
    if (!row) break;
    DcirRow p;
    p.step_seq = q.Int(0);
    p.source = q.Text(1);
    p.t_edge_s = q.Real(2);
    p.u1_v = q.Real(3);
    p.i1_a = q.Real(4);
    p.t1_s = q.Real(5);
    if (!q.IsNull(8)) {
      p.u2_v = q.Real(6);
      p.i2_a = q.Real(7);
      p.t2_s = q.Real(8);
    }
    p.valid = q.Int(10) != 0;
    if (p.valid && !q.IsNull(9)) p.resistance_ohm = q.Real(9);
    p.why_invalid = q.Text(11);
    out.push_back(std::move(p));
  }
  return out;
}

Result<std::optional<std::pair<double, double>>> Store::SampleTimeRange(int64_t run_id) {
  KP_RETURN_IF_ERROR(FlushStaged());  // this connection sees its own staged samples
  KP_ASSIGN_OR_RETURN(auto first, db_->Prepare("SELECT t_s FROM samples WHERE run_id=?1 ORDER BY seq LIMIT 1"));
  first.Bind(1, run_id);
  KP_ASSIGN_OR_RETURN(bool any, first.Step());
  if (!any) return std::optional<std::pair<double, double>>();
  const double t0 = first.Real(0);
  KP_ASSIGN_OR_RETURN(auto last, db_->Prepare("SELECT t_s FROM samples WHERE run_id=?1 ORDER BY seq DESC LIMIT 1"));
  last.Bind(1, run_id);
  KP_ASSIGN_OR_RETURN(bool more, last.Step());
  return std::optional<std::pair<double, double>>(std::pair<double, double>(t0, more ? last.Real(0) : t0));
}

Result<Store::RunTotalsRow> Store::LoadRunTotals(int64_t run_id) {
  KP_RETURN_IF_ERROR(FlushStaged());  // this connection sees its own staged samples
  KP_ASSIGN_OR_RETURN(auto q, db_->Prepare("SELECT net_mah, net_wh, delivered_mah, delivered_wh, charged_mah,"
                                           " thermometer_tolerance_c FROM runs WHERE id=?1"));
  q.Bind(1, run_id);
  KP_ASSIGN_OR_RETURN(bool row, q.Step());
  if (!row) return NotFound(fmt::format("no run {} in {}", run_id, db_->path()));
  RunTotalsRow r;
  r.net_mah = q.Real(0);
  r.net_wh = q.Real(1);
  auto opt = [&](int c) { return q.IsNull(c) ? std::optional<double>() : std::optional<double>(q.Real(c)); };
  r.delivered_mah = opt(2);
  r.delivered_wh = opt(3);
  r.charged_mah = opt(4);
  r.thermometer_tolerance_c = opt(5);
  return r;
}


Status Store::EndStep(int64_t run_id, double t_s, std::string_view reason) {
  if (step_seq_ == 0) return Status::Ok();
  KP_RETURN_IF_ERROR(EnsureBatch());
  KP_ASSIGN_OR_RETURN(auto up, db_->Prepare("UPDATE steps SET ended_s=?1, end_reason=?2 WHERE run_id=?3 AND seq=?4 AND ended_s IS NULL"));
  KP_RETURN_IF_ERROR(up.Bind(1, t_s).Bind(2, reason).Bind(3, run_id).Bind(4, step_seq_ - 1).Run());
  return Commit();
}

Status Store::EndStep(int64_t run_id, double t_s, std::string_view reason, const StepTotals& totals) {
  if (step_seq_ == 0) return Status::Ok();
  KP_RETURN_IF_ERROR(EnsureBatch());
  KP_ASSIGN_OR_RETURN(auto up, db_->Prepare("UPDATE steps SET ended_s=?1, end_reason=?2, charge_mah=?5, energy_wh=?6,"
                                            " voltage_time_vs=?7 WHERE run_id=?3 AND seq=?4 AND ended_s IS NULL"));
  up.Bind(1, t_s).Bind(2, reason).Bind(3, run_id).Bind(4, step_seq_ - 1);
  KP_RETURN_IF_ERROR(up.Bind(5, totals.charge_mah).Bind(6, totals.energy_wh).Bind(7, totals.voltage_time_vs).Run());
  return Commit();
}

Status Store::AddEvent(int64_t run_id, double t_s, std::string_view kind, std::string_view message) {
  KP_RETURN_IF_ERROR(EnsureBatch());
  KP_ASSIGN_OR_RETURN(auto ins, db_->Prepare("INSERT INTO events(run_id, t_s, kind, message, wall_at) VALUES(?1,?2,?3,?4,?5)"));
  KP_RETURN_IF_ERROR(ins.Bind(1, run_id).Bind(2, t_s).Bind(3, kind).Bind(4, message).Bind(5, wall_.WallTimeIso()).Run());
  return Commit();
}

Status Store::FinishRun(int64_t run_id, Outcome outcome, std::string_view reason) {
  KP_RETURN_IF_ERROR(EnsureBatch());
  KP_ASSIGN_OR_RETURN(auto up, db_->Prepare("UPDATE runs SET outcome=?1, reason=?2, ended_at=?3 WHERE id=?4"));
  KP_RETURN_IF_ERROR(up.Bind(1, OutcomeName(outcome)).Bind(2, reason).Bind(3, wall_.WallTimeIso()).Bind(4, run_id).Run());
  Status st = Commit();
  if (run_id == seq_run_) seq_run_ = -1;
  return st;
}

Status Store::SetVerdict(int64_t run_id, std::string_view verdict, std::string_view text, std::optional<double> percent) {
  if (verdict != "pass" && verdict != "fail" && verdict != "not judged")
    return InvalidInput(fmt::format("unknown verdict '{}': pass, fail or not judged", verdict));
  KP_RETURN_IF_ERROR(EnsureBatch());
  KP_ASSIGN_OR_RETURN(auto up, db_->Prepare("UPDATE runs SET verdict=?1, verdict_text=?2, verdict_pct_of_rated=?3 WHERE id=?4"));
  up.Bind(1, verdict).Bind(2, text).Bind(4, run_id);
  if (percent) up.Bind(3, *percent);
  KP_RETURN_IF_ERROR(up.Run());
  return Commit();
}

Status Store::AddNote(int64_t run_id, std::string_view text) {
  if (text.empty()) return InvalidInput("an empty note");
  KP_RETURN_IF_ERROR(GetRun(run_id).status());
  KP_RETURN_IF_ERROR(EnsureBatch());
  // At the run time the run has reached: the latest committed sample of a
  // live run, the end of a finished one.
  KP_ASSIGN_OR_RETURN(auto ins, db_->Prepare("INSERT INTO events(run_id, t_s, kind, message, wall_at)"
                                             " SELECT id, COALESCE(progress_t_s, 0), 'note', ?1, ?2 FROM runs WHERE id=?3"));
  KP_RETURN_IF_ERROR(ins.Bind(1, text).Bind(2, wall_.WallTimeIso()).Bind(3, run_id).Run());
  return Commit();
}

Result<int64_t> Store::AddRequest(int64_t run_id, std::string_view action, std::string_view requested_by) {
  if (action != "abort" && action != "pause" && action != "continue")
    return InvalidInput(fmt::format("unknown request '{}': use abort, pause or continue", action));
  KP_RETURN_IF_ERROR(GetRun(run_id).status());
  KP_RETURN_IF_ERROR(Commit());
  KP_ASSIGN_OR_RETURN(auto ins, db_->Prepare("INSERT INTO requests(run_id, action, requested_by, requested_at) VALUES(?1,?2,?3,?4)"));
  KP_RETURN_IF_ERROR(ins.Bind(1, run_id).Bind(2, action).Bind(3, requested_by).Bind(4, wall_.WallTimeIso()).Run());
  return static_cast<int64_t>(sqlite3_last_insert_rowid(db_->raw()));
}

Result<std::vector<RequestRow>> Store::PendingRequests(int64_t run_id) {
  // Prepared once and kept: a runner asks several times a second.
  if (!has_pending_requests_) {
    KP_ASSIGN_OR_RETURN(pending_requests_, db_->Prepare("SELECT id, run_id, action, requested_by, requested_at FROM requests"
                                                        " WHERE run_id=?1 AND handled_at IS NULL ORDER BY id"));
    has_pending_requests_ = true;
  }
  sql::Stmt& q = pending_requests_;
  q.Bind(1, run_id);
  std::vector<RequestRow> out;
  for (;;) {
    Result<bool> row = q.Step();
    if (!row.ok()) {
      q.Reset();
      return row.status();
    }
    if (!*row) break;
    out.push_back({q.Int(0), q.Int(1), q.Text(2), q.Text(3), q.Text(4)});
  }
  q.Reset();  // ends the statement's read so the snapshot does not pin the WAL
  return out;
}

Status Store::MarkRequestHandled(int64_t request_id) {
  KP_RETURN_IF_ERROR(EnsureBatch());
  KP_ASSIGN_OR_RETURN(auto up, db_->Prepare("UPDATE requests SET handled_at=?1 WHERE id=?2"));
  KP_RETURN_IF_ERROR(up.Bind(1, wall_.WallTimeIso()).Bind(2, request_id).Run());
  return Commit();
}

Result<std::optional<std::string>> Store::RequestHandledAt(int64_t request_id) {
  KP_ASSIGN_OR_RETURN(auto q, db_->Prepare("SELECT handled_at FROM requests WHERE id=?1"));
  q.Bind(1, request_id);
  KP_ASSIGN_OR_RETURN(bool row, q.Step());
  if (!row) return NotFound(fmt::format("no request {}", request_id));
  if (q.IsNull(0)) return std::optional<std::string>();
  return std::optional<std::string>(q.Text(0));
}

Result<int> Store::ReconcileOrphans() {
  KP_ASSIGN_OR_RETURN(auto q, db_->Prepare("SELECT id, runner_pid, runner_host, heartbeat_at, COALESCE(runner_token,'') FROM runs WHERE outcome='running'"));
  std::vector<std::pair<int64_t, std::string>> gone;
  const std::string host = HostName();
  const int64_t now = static_cast<int64_t>(std::time(nullptr));
  for (;;) {
    KP_ASSIGN_OR_RETURN(bool row, q.Step());
    if (!row) break;
    int64_t id = q.Int(0), pid = q.Int(1), beat = q.Int(3);
    std::string run_host = q.Text(2), token = q.Text(4);
    if (id == seq_run_) continue;  // our own live run
    if (run_host == host) {
      if (!RunnerAlive(pid, token)) gone.emplace_back(id, fmt::format("runner process {} is gone", pid));
    } else if (now - beat > 600) {
      gone.emplace_back(id, fmt::format("no heartbeat from runner on {} for {} s", run_host, now - beat));
    }
  }
  q.Reset();
  int marked = 0;
  for (const auto& [id, why] : gone) {
    // The state change and its event together, at the last committed run time.
    KP_RETURN_IF_ERROR(EnsureBatch());
    KP_ASSIGN_OR_RETURN(auto up, db_->Prepare("UPDATE runs SET outcome='interrupted', reason=?1 WHERE id=?2 AND outcome='running'"));
    KP_RETURN_IF_ERROR(up.Bind(1, why).Bind(2, id).Run());
    if (sqlite3_changes(db_->raw()) > 0) {
      KP_ASSIGN_OR_RETURN(auto ev, db_->Prepare("INSERT INTO events(run_id, t_s, kind, message, wall_at)"
                                                " SELECT id, COALESCE(progress_t_s, 0), 'interrupted', ?1, ?2 FROM runs WHERE id=?3"));
      KP_RETURN_IF_ERROR(ev.Bind(1, "interrupted: " + why).Bind(2, wall_.WallTimeIso()).Bind(3, id).Run());
      ++marked;
    }
    KP_RETURN_IF_ERROR(Commit());
  }
  return marked;
}

namespace {
constexpr const char* kRunColumns =
    "SELECT r.id, c.name, c.chemistry, r.rated_mah, r.procedure_name, r.procedure_text, r.rig, r.started_at,"
    " COALESCE(r.ended_at,''), r.outcome, r.reason, r.sample_count, r.delivered_mah, r.delivered_wh, r.net_mah,"
    " COALESCE(r.uuid,''), r.bench, r.host, r.operator, r.cell_serial, r.cell_lot, r.cell_part,"
    " (SELECT group_concat(tag, char(31)) FROM (SELECT tag FROM run_tags t WHERE t.run_id=r.id ORDER BY tag)),"
    " COALESCE(r.verdict,'')"
    " FROM runs r JOIN cells c ON c.id=r.cell_id";

// Steps a kept statement to its end, reading each row into `out`; the
// statement is reset (and its bindings cleared) whatever happens.
template <typename T, typename Reader>
Status CollectRows(sql::Stmt& q, std::vector<T>& out, Reader read) {
  for (;;) {
    Result<bool> row = q.Step();
    if (!row.ok()) {
      q.Reset();
      return row.status();
    }
    if (!*row) break;
    out.push_back(read(q));
  }
  q.Reset();
  return Status::Ok();
}

RunRow ReadRun(const sql::Stmt& q) {
  RunRow r;
  r.id = q.Int(0);
  r.cell = q.Text(1);
  r.chemistry = q.Text(2);
  r.rated_mah = q.Real(3);
  r.procedure_name = q.Text(4);
  r.procedure_text = q.Text(5);
  r.rig = q.Text(6);
  r.started_at = q.Text(7);
  r.ended_at = q.Text(8);
  r.outcome = ParseOutcome(q.Text(9)).value_or(Outcome::kInterrupted);
  r.reason = q.Text(10);
  r.sample_count = q.Int(11);
  if (!q.IsNull(12)) r.delivered_mah = q.Real(12);
  if (!q.IsNull(13)) r.delivered_wh = q.Real(13);
  r.net_mah = q.Real(14);
  r.uuid = q.Text(15);
  r.bench = q.Text(16);
  r.host = q.Text(17);
  r.operator_name = q.Text(18);
  r.cell_serial = q.Text(19);
  r.cell_lot = q.Text(20);
  r.cell_part = q.Text(21);
  if (!q.IsNull(22)) {
    const std::string all = q.Text(22);
    size_t b = 0;
    for (;;) {
      size_t e = all.find('\x1f', b);
      r.tags.push_back(all.substr(b, e == std::string::npos ? std::string::npos : e - b));
      if (e == std::string::npos) break;
      b = e + 1;
    }
  }
  r.verdict = q.Text(23);
  return r;
}

// A user's field pattern as a LIKE pattern: `*` and `?` are the wildcards,
// LIKE's own `%` and `_` (and the escape) are taken literally.
std::string LikePattern(std::string_view glob) {
  std::string out;
  for (char c : glob) {
    if (c == '*') out += '%';
    else if (c == '?') out += '_';
    else if (c == '%' || c == '_' || c == '\\') out += '\\', out += c;
    else out += c;
  }
  return out;
}

std::string LikeSubstring(std::string_view text) {
  std::string out = "%";
  for (char c : text) {
    if (c == '%' || c == '_' || c == '\\') out += '\\';
    out += c;
  }
  return out + "%";
}
}  // namespace

// Listing and lookups run several times a second in the panel: their
// statements are prepared once and reset after each use (so no read snapshot
// stays open).
Result<std::vector<RunRow>> Store::ListRuns() {
  if (!has_list_runs_) {
    KP_ASSIGN_OR_RETURN(list_runs_, db_->Prepare(std::string(kRunColumns) + " ORDER BY r.id"));
    has_list_runs_ = true;
  }
  std::vector<RunRow> out;
  out.reserve(listed_runs_ + 1);
  KP_RETURN_IF_ERROR(CollectRows(list_runs_, out, ReadRun));
  listed_runs_ = out.size();
  return out;
}

bool RunFilter::empty() const {
  return cell.empty() && serial.empty() && lot.empty() && part.empty() && tag.empty() && operator_name.empty() &&
         procedure.empty() && bench.empty() && !outcome && verdict.empty() && since.empty() && until.empty() && text.empty();
}

// Built per call with every value bound (never spliced into the SQL).
Result<std::vector<RunRow>> Store::FindRuns(const RunFilter& f) {
  if (f.empty()) return ListRuns();
  std::string where;
  std::vector<std::string> values;
  auto add = [&](const std::string& clause, std::string value) {
    where += where.empty() ? " WHERE " : " AND ";
    values.push_back(std::move(value));
    std::string c = clause;
    for (size_t p = c.find('#'); p != std::string::npos; p = c.find('#')) c.replace(p, 1, "?" + std::to_string(values.size()));
    where += c;
  };
  const char* kLike = " LIKE # ESCAPE '\\'";
  if (!f.cell.empty()) add(std::string("c.name") + kLike, LikePattern(f.cell));
  if (!f.serial.empty()) add(std::string("r.cell_serial") + kLike, LikePattern(f.serial));
  if (!f.lot.empty()) add(std::string("r.cell_lot") + kLike, LikePattern(f.lot));
  if (!f.part.empty()) add(std::string("r.cell_part") + kLike, LikePattern(f.part));
  if (!f.operator_name.empty()) add(std::string("r.operator") + kLike, LikePattern(f.operator_name));
  if (!f.procedure.empty()) add(std::string("r.procedure_name") + kLike, LikePattern(f.procedure));
  if (!f.bench.empty()) add(std::string("r.bench") + kLike, LikePattern(f.bench));
  if (!f.tag.empty())
    add(std::string("EXISTS (SELECT 1 FROM run_tags t WHERE t.run_id=r.id AND t.tag") + kLike + ")", LikePattern(f.tag));
  if (f.outcome) add("r.outcome = #", OutcomeName(*f.outcome));
  if (!f.verdict.empty()) add("r.verdict = #", f.verdict);
  if (!f.since.empty()) add("r.started_at >= #", f.since);
  // Inclusive: "2026-03-01" keeps every run started that day ('~' sorts after
  // every character of an ISO 8601 time).
  if (!f.until.empty()) add("r.started_at <= #", f.until + "~");
  // Every `#` of a clause is its one value.
  if (!f.text.empty()) {
    add("(c.name LIKE # ESCAPE '\\' OR r.cell_serial LIKE # ESCAPE '\\' OR r.cell_lot LIKE # ESCAPE '\\'"
        " OR r.cell_part LIKE # ESCAPE '\\' OR r.operator LIKE # ESCAPE '\\' OR r.bench LIKE # ESCAPE '\\'"
        " OR r.procedure_name LIKE # ESCAPE '\\' OR r.reason LIKE # ESCAPE '\\' OR r.uuid LIKE # ESCAPE '\\'"
        " OR EXISTS (SELECT 1 FROM run_tags t WHERE t.run_id=r.id AND t.tag LIKE # ESCAPE '\\')"
        " OR EXISTS (SELECT 1 FROM events e WHERE e.run_id=r.id AND e.kind='note' AND e.message LIKE # ESCAPE '\\'))",
        LikeSubstring(f.text));
  }
  KP_ASSIGN_OR_RETURN(auto q, db_->Prepare(std::string(kRunColumns) + where + " ORDER BY r.id"));
  for (size_t i = 0; i < values.size(); ++i) q.Bind(static_cast<int>(i + 1), values[i]);
  std::vector<RunRow> out;
  KP_RETURN_IF_ERROR(CollectRows(q, out, ReadRun));
  return out;
}

Result<int64_t> Store::ResolveRun(std::string_view ref) {
  if (ref.empty()) return InvalidInput("no run given");
  const bool digits = ref.find_first_not_of("0123456789") == std::string_view::npos;
  auto by_number = [&]() -> Result<int64_t> {
    const int64_t id = std::stoll(std::string(ref));
    KP_RETURN_IF_ERROR(GetRun(id).status());
    return id;
  };
  // Up to 7 digits is a run number; 8 or more hex digits (and dashes) the
  // start of a UUID, else a number when it is all digits.
  if (digits && ref.size() < 8) return by_number();
  std::string lower;
  for (char c : ref) lower += static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  if (lower.size() < 8 || lower.size() > 36 || lower.find_first_not_of("0123456789abcdef-") != std::string::npos)
    return InvalidInput(fmt::format("'{}' is neither a run number nor a run UUID (or a prefix of 8 or more of its characters)", ref));
  KP_ASSIGN_OR_RETURN(auto q, db_->Prepare("SELECT id FROM runs WHERE substr(uuid, 1, ?2) = ?1 ORDER BY id LIMIT 2"));
  q.Bind(1, lower).Bind(2, static_cast<int64_t>(lower.size()));
  std::vector<int64_t> ids;
  for (;;) {
    KP_ASSIGN_OR_RETURN(bool row, q.Step());
    if (!row) break;
    ids.push_back(q.Int(0));
  }
  if (ids.size() > 1) return InvalidInput(fmt::format("'{}' is the start of more than one run's UUID: give more of it", ref));
  if (ids.size() == 1) return ids[0];
  if (digits && ref.size() <= 18) return by_number();
  return NotFound(fmt::format("no run with UUID {} in {}", ref, db_->path()));
}

Result<EquipmentRow> Store::LoadEquipment(int64_t run_id) {
  EquipmentRow out;
  KP_ASSIGN_OR_RETURN(auto r, db_->Prepare("SELECT rig_text, software_version, software_commit FROM runs WHERE id=?1"));
  r.Bind(1, run_id);
  KP_ASSIGN_OR_RETURN(bool found, r.Step());
  if (!found) return NotFound(fmt::format("no run {} in {}", run_id, db_->path()));
  out.rig_text = r.Text(0);
  out.software_version = r.Text(1);
  out.software_commit = r.Text(2);
  KP_ASSIGN_OR_RETURN(auto q, db_->Prepare("SELECT name, roles, address, profile, identity, manufacturer, model, serial, firmware,"
                                           " voltage_gain, voltage_offset_v, current_gain, current_offset_a, temperature_gain,"
                                           " temperature_offset_c, calibrated_on FROM instruments WHERE run_id=?1 ORDER BY seq"));
  q.Bind(1, run_id);
  for (;;) {
    KP_ASSIGN_OR_RETURN(bool row, q.Step());
    if (!row) break;
    InstrumentRecord i;
    i.name = q.Text(0), i.roles = q.Text(1), i.address = q.Text(2), i.profile = q.Text(3), i.identity = q.Text(4);
    i.manufacturer = q.Text(5), i.model = q.Text(6), i.serial = q.Text(7), i.firmware = q.Text(8);
    i.voltage_gain = q.Real(9), i.voltage_offset_v = q.Real(10), i.current_gain = q.Real(11), i.current_offset_a = q.Real(12);
    i.temperature_gain = q.Real(13), i.temperature_offset_c = q.Real(14), i.calibrated_on = q.Text(15);
    out.instruments.push_back(std::move(i));
  }
  return out;
}

Result<std::vector<EventRow>> Store::LoadNotes(int64_t run_id) {
  KP_ASSIGN_OR_RETURN(auto q, db_->Prepare("SELECT t_s, kind, message, wall_at FROM events WHERE run_id=?1 AND kind='note' ORDER BY id"));
  q.Bind(1, run_id);
  std::vector<EventRow> out;
  for (;;) {
    KP_ASSIGN_OR_RETURN(bool row, q.Step());
    if (!row) break;
    out.push_back({q.Real(0), q.Text(1), q.Text(2), q.Text(3)});
  }
  return out;
}

Result<RunRow> Store::GetRun(int64_t run_id) {
  KP_RETURN_IF_ERROR(FlushStaged());  // this connection sees its own staged samples
  if (!has_get_run_) {
    KP_ASSIGN_OR_RETURN(get_run_, db_->Prepare(std::string(kRunColumns) + " WHERE r.id=?1"));
    has_get_run_ = true;
  }
  sql::Stmt& q = get_run_;
  q.Bind(1, run_id);
  Result<bool> row = q.Step();
  if (!row.ok()) {
    q.Reset();
    return row.status();
  }
  if (!*row) {
    q.Reset();
    return NotFound(fmt::format("no run {} in {}", run_id, db_->path()));
  }
  RunRow out = ReadRun(q);
  q.Reset();
  return out;
}

Status Store::ForEachSample(int64_t run_id, const std::function<Status(const Sample&)>& fn) {
  KP_RETURN_IF_ERROR(FlushStaged());  // this connection sees its own staged samples
  KP_ASSIGN_OR_RETURN(auto q, db_->Prepare(
                                  "SELECT t_s, voltage_v, current_a, temperature_c, step FROM samples WHERE run_id=?1 ORDER BY seq"));
  q.Bind(1, run_id);
  for (;;) {
    KP_ASSIGN_OR_RETURN(bool row, q.Step());
    if (!row) break;
    Sample s{q.Real(0), q.Real(1), q.Real(2), q.Real(3), static_cast<int>(q.Int(4))};
    KP_RETURN_IF_ERROR(fn(s));
  }
  return Status::Ok();
}

Result<std::vector<Sample>> Store::LoadSamples(int64_t run_id) {
  std::vector<Sample> out;
  KP_RETURN_IF_ERROR(ForEachSample(run_id, [&](const Sample& s) {
    out.push_back(s);
    return Status::Ok();
  }));
  return out;
}

Result<std::vector<EventRow>> Store::LoadEvents(int64_t run_id) {
  KP_ASSIGN_OR_RETURN(auto q, db_->Prepare("SELECT t_s, kind, message, wall_at FROM events WHERE run_id=?1 ORDER BY id"));
  q.Bind(1, run_id);
  std::vector<EventRow> out;
  for (;;) {
    KP_ASSIGN_OR_RETURN(bool row, q.Step());
    if (!row) break;
    out.push_back({q.Real(0), q.Text(1), q.Text(2), q.Text(3)});
  }
  return out;
}

Result<std::vector<StepRow>> Store::LoadSteps(int64_t run_id) {
  KP_ASSIGN_OR_RETURN(auto q, db_->Prepare(
                                  "SELECT seq, idx, kind, label, started_s, ended_s, COALESCE(end_reason,''), mode, level,"
                                   " loop_pass, cycle, held_s, record, charge_mah, energy_wh, voltage_time_vs FROM steps"
                                  " WHERE run_id=?1 ORDER BY seq"));
  q.Bind(1, run_id);
  std::vector<StepRow> out;
  for (;;) {
    KP_ASSIGN_OR_RETURN(bool row, q.Step());
    if (!row) break;
    StepRow s;
    s.seq = q.Int(0);
    s.index = static_cast<int>(q.Int(1));
    s.kind = q.Text(2);
    s.label = q.Text(3);
    s.started_s = q.Real(4);
    if (!q.IsNull(5)) s.ended_s = q.Real(5);
    s.end_reason = q.Text(6);
    if (!q.IsNull(7)) s.mode = q.Text(7);
    if (!q.IsNull(8)) s.level = q.Real(8);
    s.pass = static_cast<int>(q.Int(9));
    s.cycle = static_cast<int>(q.Int(10));
    s.held_s = q.Real(11);
    s.migrated = q.Text(12) != "engine";
    if (!q.IsNull(13)) s.charge_mah = q.Real(13);
    if (!q.IsNull(14)) s.energy_wh = q.Real(14);
    if (!q.IsNull(15)) s.voltage_time_vs = q.Real(15);
    out.push_back(std::move(s));
  }
  return out;
}

Result<std::optional<RunProgress>> Store::LoadProgress(int64_t run_id) {
  KP_ASSIGN_OR_RETURN(auto q, db_->Prepare("SELECT engine_snapshot, progress_t_s, net_mah, net_wh, delivered_mah, delivered_wh,"
                                           " charged_mah FROM runs WHERE id=?1"));
  q.Bind(1, run_id);
  KP_ASSIGN_OR_RETURN(bool row, q.Step());
  if (!row) return NotFound(fmt::format("no run {} in {}", run_id, db_->path()));
  if (q.IsNull(0)) return std::optional<RunProgress>();
  RunProgress p{q.Text(0), q.Real(1), q.Real(2), q.Real(3)};
  if (!q.IsNull(4)) p.discharge_mah = q.Real(4);
  if (!q.IsNull(5)) p.discharge_wh = q.Real(5);
  if (!q.IsNull(6)) p.charged_mah = q.Real(6);
  return std::optional<RunProgress>(p);
}

Result<std::vector<SampleBlock>> Store::LoadBlocks(int64_t run_id, int64_t from_block, int64_t max_blocks) {
  KP_RETURN_IF_ERROR(FlushStaged());  // this connection sees its own staged samples
  if (!has_load_blocks_) {
    KP_ASSIGN_OR_RETURN(load_blocks_, db_->Prepare(std::string(kBlockColumns) + " WHERE run_id=?1 AND block>=?2 ORDER BY block LIMIT ?3"));
    has_load_blocks_ = true;
  }
  load_blocks_.Bind(1, run_id).Bind(2, from_block).Bind(3, max_blocks);
  std::vector<SampleBlock> out;
  KP_RETURN_IF_ERROR(CollectRows(load_blocks_, out, ReadBlock));
  return out;
}

Result<std::vector<Sample>> Store::LoadSampleRange(int64_t run_id, int64_t first_seq, int64_t end_seq) {
  KP_RETURN_IF_ERROR(FlushStaged());  // this connection sees its own staged samples
  KP_ASSIGN_OR_RETURN(auto q, db_->Prepare("SELECT t_s, voltage_v, current_a, temperature_c, step FROM samples"
                                           " WHERE run_id=?1 AND seq>=?2 AND seq<?3 ORDER BY seq"));
  q.Bind(1, run_id).Bind(2, first_seq).Bind(3, end_seq);
  std::vector<Sample> out;
  out.reserve(static_cast<size_t>(std::max<int64_t>(0, std::min<int64_t>(end_seq - first_seq, 1 << 22))));
  for (;;) {
    KP_ASSIGN_OR_RETURN(bool row, q.Step());
    if (!row) break;
    out.push_back(Sample{q.Real(0), q.Real(1), q.Real(2), q.Real(3), static_cast<int>(q.Int(4))});
  }
  return out;
}

Result<std::vector<Sample>> Store::LatestSamples(int64_t run_id, int n) {
  KP_ASSIGN_OR_RETURN(auto q, db_->Prepare("SELECT t_s, voltage_v, current_a, temperature_c, step FROM"
                                           " (SELECT * FROM samples WHERE run_id=?1 ORDER BY seq DESC LIMIT ?2) ORDER BY seq"));
  q.Bind(1, run_id).Bind(2, static_cast<int64_t>(n));
  std::vector<Sample> out;
  for (;;) {
    KP_ASSIGN_OR_RETURN(bool row, q.Step());
    if (!row) break;
    out.push_back(Sample{q.Real(0), q.Real(1), q.Real(2), q.Real(3), static_cast<int>(q.Int(4))});
  }
  return out;
}

}  // namespace kp
