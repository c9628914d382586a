// Schema v5: migration from every earlier version (v1..v3 built here from the
// SQL those versions ran, v4 a database written by the v4 store, kept under
// tests/rig/data), PRAGMA application_id, newer databases opened read-only,
// the traceable run record, notes, run lookup by UUID and the run filters.
#include <gtest/gtest.h>
#include <sqlite3.h>

#include <filesystem>
#include <set>

#include "rig/store.h"
#include "rig/uuid.h"
#include "rig/version.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

// Schema version 1, as MigrateTo1 created it, with one finished run holding
// two samples, two steps and a note.
constexpr const char* kV1 = R"sql(
  CREATE TABLE cells(id INTEGER PRIMARY KEY, name TEXT NOT NULL UNIQUE, chemistry TEXT NOT NULL, rated_mah REAL NOT NULL,
    created_at TEXT NOT NULL);
  CREATE TABLE runs(id INTEGER PRIMARY KEY, cell_id INTEGER NOT NULL REFERENCES cells(id), procedure_name TEXT NOT NULL,
    procedure_text TEXT NOT NULL, rig TEXT NOT NULL, rated_mah REAL NOT NULL, started_at TEXT NOT NULL, ended_at TEXT,
    outcome TEXT NOT NULL CHECK(outcome IN ('running','completed','aborted','interrupted')), reason TEXT NOT NULL DEFAULT '',
    runner_pid INTEGER, runner_host TEXT, heartbeat_at INTEGER);
  CREATE TABLE steps(run_id INTEGER NOT NULL REFERENCES runs(id), seq INTEGER NOT NULL, idx INTEGER NOT NULL, kind TEXT NOT NULL,
    label TEXT NOT NULL, started_s REAL NOT NULL, ended_s REAL, end_reason TEXT, PRIMARY KEY(run_id, seq)) WITHOUT ROWID;
  CREATE TABLE samples(run_id INTEGER NOT NULL, seq INTEGER NOT NULL, t_s REAL NOT NULL, voltage_v REAL NOT NULL,
    current_a REAL NOT NULL, temperature_c REAL NOT NULL, step INTEGER NOT NULL, PRIMARY KEY(run_id, seq)) WITHOUT ROWID;
  CREATE TABLE events(id INTEGER PRIMARY KEY, run_id INTEGER NOT NULL REFERENCES runs(id), t_s REAL NOT NULL, kind TEXT NOT NULL,
    message TEXT NOT NULL, wall_at TEXT NOT NULL);
  CREATE INDEX events_by_run ON events(run_id, id);
  CREATE TABLE requests(id INTEGER PRIMARY KEY, run_id INTEGER NOT NULL REFERENCES runs(id),
    action TEXT NOT NULL CHECK(action IN ('abort','pause','continue')), requested_by TEXT NOT NULL, requested_at TEXT NOT NULL,
    handled_at TEXT);
  INSERT INTO cells VALUES(1, 'old-cell', 'li-ion', 2500, '2026-01-01T00:00:00Z');
  INSERT INTO runs(id, cell_id, procedure_name, procedure_text, rig, rated_mah, started_at, ended_at, outcome, runner_host,
    heartbeat_at)
    VALUES(1, 1, 'p', 'text', 'sim', 2500, '2026-01-01T00:00:00Z', '2026-01-01T05:00:00Z', 'completed', 'lab-pc', 1767243600);
  INSERT INTO steps VALUES(1, 0, 0, 'rest', 'rest', 0, 1, 'time'), (1, 1, 1, 'constant-current discharge', 'main', 1, 2, 'time');
  INSERT INTO samples VALUES(1, 0, 1.0, 4.1, 0.5, 22.0, 1), (1, 1, 2.0, 4.09, 0.5, 22.1, 1);
  INSERT INTO events(run_id, t_s, kind, message, wall_at) VALUES(1, 1.5, 'note', 'old note', '2026-01-01T00:00:01Z');
)sql";

// What MigrateTo2 and MigrateTo3 added (the SQL of those versions).
constexpr const char* kV2 = R"sql(
  ALTER TABLE runs ADD COLUMN engine_snapshot TEXT;
  ALTER TABLE runs ADD COLUMN progress_t_s REAL;
  ALTER TABLE runs ADD COLUMN delivered_mah REAL NOT NULL DEFAULT 0;
  ALTER TABLE runs ADD COLUMN delivered_wh REAL NOT NULL DEFAULT 0;
  ALTER TABLE runs ADD COLUMN runner_token TEXT;
  ALTER TABLE runs ADD COLUMN resumes INTEGER NOT NULL DEFAULT 0;
  CREATE INDEX requests_pending ON requests(run_id, id) WHERE handled_at IS NULL;
  UPDATE runs SET progress_t_s = 2.0, delivered_mah = 0.14, delivered_wh = 0.5;
)sql";
constexpr const char* kV3 = R"sql(
  ALTER TABLE steps ADD COLUMN mode TEXT;
  ALTER TABLE steps ADD COLUMN level REAL;
  ALTER TABLE steps ADD COLUMN loop_pass INTEGER NOT NULL DEFAULT 0;
  ALTER TABLE steps ADD COLUMN cycle INTEGER NOT NULL DEFAULT 0;
  ALTER TABLE steps ADD COLUMN held_s REAL NOT NULL DEFAULT 0;
  ALTER TABLE steps ADD COLUMN record TEXT NOT NULL DEFAULT 'migrated';
  ALTER TABLE steps ADD COLUMN charge_mah REAL;
  ALTER TABLE steps ADD COLUMN energy_wh REAL;
  ALTER TABLE steps ADD COLUMN voltage_time_vs REAL;
  CREATE TABLE dcir_points(run_id INTEGER NOT NULL REFERENCES runs(id), seq INTEGER NOT NULL, step_seq INTEGER NOT NULL,
    source TEXT NOT NULL, t_edge_s REAL NOT NULL, u1_v REAL NOT NULL, i1_a REAL NOT NULL, t1_s REAL NOT NULL, u2_v REAL, i2_a REAL,
    t2_s REAL, resistance_ohm REAL, valid INTEGER NOT NULL, why_invalid TEXT NOT NULL DEFAULT '', PRIMARY KEY(run_id, seq))
    WITHOUT ROWID;
  ALTER TABLE runs RENAME COLUMN delivered_mah TO net_mah;
  ALTER TABLE runs RENAME COLUMN delivered_wh TO net_wh;
  ALTER TABLE runs ADD COLUMN delivered_mah REAL;
  ALTER TABLE runs ADD COLUMN delivered_wh REAL;
  ALTER TABLE runs ADD COLUMN charged_mah REAL;
  ALTER TABLE runs ADD COLUMN thermometer_tolerance_c REAL;
  UPDATE steps SET charge_mah = 0.139, energy_wh = 0.57, record = 'engine' WHERE seq = 1;
  UPDATE runs SET delivered_mah = 0.139, delivered_wh = 0.57;
)sql";

void MakeDb(const std::string& path, int version) {
  auto db = sql::Db::Open(path, true);
  ASSERT_TRUE(db.ok());
  ASSERT_OK((*db)->Exec(kV1));
  if (version >= 2) ASSERT_OK((*db)->Exec(kV2));
  if (version >= 3) ASSERT_OK((*db)->Exec(kV3));
  ASSERT_OK((*db)->Exec("PRAGMA user_version=" + std::to_string(version)));
}

// A copy of the v4 database the v4 store wrote (tests/rig/data/schema_v4.db:
// two runs of cells fixture-cell-7 and -8, steps, samples, blocks, a DC-IR
// point, a note, an abort).
std::string CopyV4(const testing::TempDir& dir) {
  std::string to = dir.File("v4.db");
  std::filesystem::copy_file(testing::SourcePath("tests/rig/data/schema_v4.db"), to);
  return to;
}

int64_t Scalar(Store& s, const std::string& sql) {
  auto q = s.db().Prepare(sql);
  EXPECT_TRUE(q.ok()) << sql;
  if (!q.ok()) return -1;
  auto row = q->Step();
  EXPECT_TRUE(row.ok() && *row) << sql;
  return q->Int(0);
}

// Checks a database migrated to v5 keeps its runs and has the v5 record.
void ExpectMigratedRecord(Store& s, int64_t runs) {
  EXPECT_EQ(*s.SchemaVersion(), kSchemaVersion);
  EXPECT_EQ(*s.ApplicationId(), kApplicationId);
  auto all = s.ListRuns();
  ASSERT_TRUE(all.ok());
  ASSERT_EQ(static_cast<int64_t>(all->size()), runs);
  std::set<std::string> uuids;
  for (const RunRow& r : *all) {
    EXPECT_TRUE(LooksLikeUuid(r.uuid)) << r.uuid;
    EXPECT_EQ(r.uuid[14], '4') << "version 4: " << r.uuid;
    EXPECT_NE(std::string("89ab").find(r.uuid[19]), std::string::npos) << "RFC 9562 variant: " << r.uuid;
    uuids.insert(r.uuid);
    EXPECT_TRUE(r.verdict.empty());
    EXPECT_TRUE(r.tags.empty());
  }
  EXPECT_EQ(static_cast<int64_t>(uuids.size()), runs);
  // The views answer for old runs too.
  EXPECT_EQ(Scalar(s, "SELECT COUNT(*) FROM run_summary"), runs);
  EXPECT_EQ(Scalar(s, "SELECT COUNT(*) FROM step_summary"), Scalar(s, "SELECT COUNT(*) FROM steps"));
  EXPECT_EQ(Scalar(s, "SELECT COUNT(*) FROM pragma_integrity_check WHERE integrity_check <> 'ok'"), 0);
}

TEST(SchemaV5, EveryEarlierVersionMigratesKeepingItsData) {
  for (int version = 1; version <= 3; ++version) {
    SCOPED_TRACE("from version " + std::to_string(version));
    testing::TempDir dir;
    MakeDb(dir.File("old.db"), version);
    SteadyClock wall;
    auto store = Store::Open(dir.File("old.db"), wall);
    ASSERT_TRUE(store.ok()) << store.status().ToString();
    ExpectMigratedRecord(**store, 1);
    auto run = (*store)->GetRun(1);
    ASSERT_TRUE(run.ok());
    EXPECT_EQ(run->cell, "old-cell");
    EXPECT_EQ(run->sample_count, 2);
    EXPECT_EQ(run->host, "lab-pc");  // from the runner's host
    auto notes = (*store)->LoadNotes(1);
    ASSERT_TRUE(notes.ok());
    ASSERT_EQ(notes->size(), 1u);
    EXPECT_EQ((*notes)[0].message, "old note");
    auto eq = (*store)->LoadEquipment(1);
    ASSERT_TRUE(eq.ok());
    EXPECT_TRUE(eq->instruments.empty());
    EXPECT_EQ(eq->software_version, "");  // unknown for runs made before v5
    // heartbeat_at keeps its meaning (Unix seconds); heartbeat_utc reads it as ISO 8601.
    auto q = (*store)->db().Prepare("SELECT heartbeat_at, heartbeat_utc FROM runs WHERE id=1");
    ASSERT_TRUE(q.ok() && *q->Step());
    EXPECT_EQ(q->Int(0), 1767243600);
    EXPECT_EQ(q->Text(1), "2026-01-01T05:00:00.000Z");
    if (version == 3) {
      auto steps = (*store)->LoadSteps(1);
      ASSERT_TRUE(steps.ok());
      ASSERT_EQ(steps->size(), 2u);
      EXPECT_DOUBLE_EQ(*(*steps)[1].charge_mah, 0.139);
    }
  }
}

TEST(SchemaV5, TheDatabaseTheV4StoreWroteMigrates) {
  testing::TempDir dir;
  const std::string path = CopyV4(dir);
  SteadyClock wall;
  auto store = Store::Open(path, wall);
  ASSERT_TRUE(store.ok()) << store.status().ToString();
  ExpectMigratedRecord(**store, 2);
  auto run = (*store)->GetRun(1);
  ASSERT_TRUE(run.ok());
  EXPECT_EQ(run->cell, "fixture-cell-7");
  EXPECT_EQ(run->sample_count, 350);
  EXPECT_EQ(run->outcome, Outcome::kCompleted);
  ASSERT_TRUE(run->delivered_mah.has_value());
  EXPECT_DOUBLE_EQ(*run->delivered_mah, 2500.0);
  EXPECT_EQ((*store)->GetRun(2)->outcome, Outcome::kAborted);
  auto steps = (*store)->LoadSteps(1);
  ASSERT_TRUE(steps.ok());
  ASSERT_EQ(steps->size(), 3u);
  EXPECT_EQ((*steps)[2].kind, "constant-current discharge");
  EXPECT_EQ((*(*store)->LoadDcirPoints(1)).size(), 1u);
  auto blocks = (*store)->LoadBlocks(1, 0, 100);
  ASSERT_TRUE(blocks.ok());
  EXPECT_EQ(blocks->size(), 3u);  // 350 samples in blocks of 128
  auto notes = (*store)->LoadNotes(1);
  ASSERT_TRUE(notes.ok());
  ASSERT_EQ(notes->size(), 1u);
  EXPECT_EQ((*notes)[0].message, "fixture: cell taken from tray 3");
  // The cycle view sums the step records: 1400 mAh charged in, 2500 out in cycle 1.
  auto q = (*store)->db().Prepare("SELECT charge_in_mah, discharged_mah, coulombic_efficiency FROM cycle_summary WHERE run=1 AND cycle=1");
  ASSERT_TRUE(q.ok() && *q->Step());
  EXPECT_DOUBLE_EQ(q->Real(0), 1400.0);
  EXPECT_DOUBLE_EQ(q->Real(1), 2500.0);
  EXPECT_DOUBLE_EQ(q->Real(2), 2500.0 / 1400.0);
  // A second open finds nothing left to migrate and the same UUIDs.
  const std::string uuid = run->uuid;
  store->reset();
  auto again = Store::Open(path, wall);
  ASSERT_TRUE(again.ok());
  EXPECT_EQ((*again)->GetRun(1)->uuid, uuid);
}

TEST(SchemaV5, NewerDatabaseOpensReadOnlyForReadersAndIsRefusedToWriters) {
  testing::TempDir dir;
  const std::string path = dir.File("future.db");
  SteadyClock wall;
  {
    auto store = Store::Open(path, wall);
    ASSERT_TRUE(store.ok());
    ASSERT_TRUE((*store)->BeginRun(NewRun{"c", "li-ion", 2500, "p", "t", "sim"}).ok());
    ASSERT_OK((*store)->db().Exec("PRAGMA user_version=" + std::to_string(kSchemaVersion + 1)));
  }
  auto writer = Store::Open(path, wall);
  ASSERT_FALSE(writer.ok());
  EXPECT_NE(writer.status().message().find("newer"), std::string::npos) << writer.status().message();
  Store::Options o;
  o.read_only_if_newer = true;
  auto reader = Store::Open(path, wall, o);
  ASSERT_TRUE(reader.ok()) << reader.status().ToString();
  EXPECT_EQ((*reader)->newer_schema(), kSchemaVersion + 1);
  auto runs = (*reader)->ListRuns();
  ASSERT_TRUE(runs.ok());
  EXPECT_EQ(runs->size(), 1u);
  EXPECT_FALSE((*reader)->AddNote(1, "must not be written").ok());
  // Nothing was migrated or written.
  auto raw = sql::Db::Open(path, false);
  ASSERT_TRUE(raw.ok());
  auto v = (*raw)->Prepare("PRAGMA user_version");
  ASSERT_TRUE(*v->Step());
  EXPECT_EQ(v->Int(0), kSchemaVersion + 1);
}

TEST(SchemaV5, AnotherApplicationsDatabaseIsRefused) {
  testing::TempDir dir;
  {
    auto db = sql::Db::Open(dir.File("other.db"), true);
    ASSERT_TRUE(db.ok());
    ASSERT_OK((*db)->Exec("CREATE TABLE t(x); PRAGMA application_id=1234;"));
  }
  SteadyClock wall;
  auto store = Store::Open(dir.File("other.db"), wall);
  ASSERT_FALSE(store.ok());
  EXPECT_NE(store.status().message().find("not a kneepoint database"), std::string::npos) << store.status().message();
}

NewRun Traced(const std::string& cell, const std::string& serial, const std::string& lot, std::vector<std::string> tags,
              const std::string& op) {
  NewRun r{cell, "li-ion", 2500, "capacity " + cell, "text", "sim"};
  r.cell_serial = serial;
  r.cell_lot = lot;
  r.cell_part = "KP-18650-25";
  r.tags = std::move(tags);
  r.operator_name = op;
  r.bench = "bench 2";
  return r;
}

TEST(SchemaV5, NewRunsCarryTheirRecordAndEquipment) {
  testing::TempDir dir;
  SteadyClock wall;
  auto store = Store::Open(dir.File("r.db"), wall);
  ASSERT_TRUE(store.ok());
  NewRun nr = Traced("cell-a", "SN-001", "LOT-7", {"incoming", "batch-7"}, "J. Doe");
  nr.note = "first note";
  nr.rig_text = "[bench]\nname = \"bench 2\"\n";
  InstrumentRecord load;
  load.name = "load";
  load.roles = "load";
  load.address = "tcp:192.0.2.7:5025";
  load.profile = "generic-scpi-load";
  load.identity = "Maker Inc, EL-300 ,SN 42,FW 1.2.3";
  SplitIdentity(load);
  load.current_gain = 1.002;
  load.current_offset_a = -0.0004;
  load.calibrated_on = "2026-02-01";
  nr.instruments.push_back(load);
  auto id = (*store)->BeginRun(nr);
  ASSERT_TRUE(id.ok()) << id.status().ToString();
  auto run = (*store)->GetRun(*id);
  ASSERT_TRUE(run.ok());
  EXPECT_TRUE(LooksLikeUuid(run->uuid));
  EXPECT_EQ(run->cell_serial, "SN-001");
  EXPECT_EQ(run->cell_lot, "LOT-7");
  EXPECT_EQ(run->cell_part, "KP-18650-25");
  EXPECT_EQ(run->operator_name, "J. Doe");
  EXPECT_EQ(run->bench, "bench 2");
  EXPECT_FALSE(run->host.empty());
  EXPECT_EQ(run->tags, (std::vector<std::string>{"batch-7", "incoming"}));
  auto eq = (*store)->LoadEquipment(*id);
  ASSERT_TRUE(eq.ok());
  EXPECT_EQ(eq->software_version, SoftwareVersion());
  EXPECT_EQ(eq->software_commit, BuildCommit());
  EXPECT_EQ(eq->rig_text, nr.rig_text);
  ASSERT_EQ(eq->instruments.size(), 1u);
  const InstrumentRecord& i = eq->instruments[0];
  EXPECT_EQ(i.manufacturer, "Maker Inc");
  EXPECT_EQ(i.model, "EL-300");
  EXPECT_EQ(i.serial, "SN 42");
  EXPECT_EQ(i.firmware, "FW 1.2.3");
  EXPECT_EQ(i.identity, "Maker Inc, EL-300 ,SN 42,FW 1.2.3");
  EXPECT_DOUBLE_EQ(i.current_gain, 1.002);
  EXPECT_DOUBLE_EQ(i.current_offset_a, -0.0004);
  EXPECT_EQ(i.calibrated_on, "2026-02-01");
  // Notes: the one given at the start (t = 0) and one added later, at the
  // run time the run had reached.
  ASSERT_OK((*store)->AppendSample(*id, Sample{0, 4.1, 0.5, 22, 0}));
  ASSERT_OK((*store)->AppendSample(*id, Sample{30, 4.0, 0.5, 22, 0}));
  (*store)->SetProgress(*id, RunProgress{"", 30.0, 0.1, 0.4});
  ASSERT_OK((*store)->Commit());
  ASSERT_OK((*store)->AddNote(*id, "probe re-taped"));
  auto notes = (*store)->LoadNotes(*id);
  ASSERT_TRUE(notes.ok());
  ASSERT_EQ(notes->size(), 2u);
  EXPECT_EQ((*notes)[0].message, "first note");
  EXPECT_EQ((*notes)[0].t_s, 0.0);
  EXPECT_EQ((*notes)[1].message, "probe re-taped");
  EXPECT_EQ((*notes)[1].t_s, 30.0);
  EXPECT_FALSE((*notes)[1].wall_at.empty());
  // Found by number, UUID, a prefix of it, in either case.
  EXPECT_EQ(*(*store)->ResolveRun(std::to_string(*id)), *id);
  EXPECT_EQ(*(*store)->ResolveRun(run->uuid), *id);
  std::string upper = run->uuid.substr(0, 8);
  for (char& c : upper) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  EXPECT_EQ(*(*store)->ResolveRun(upper), *id);
  EXPECT_EQ((*store)->ResolveRun("99").status().code(), StatusCode::kNotFound);
  EXPECT_EQ((*store)->ResolveRun("abc").status().code(), StatusCode::kInvalidInput);
  EXPECT_EQ((*store)->ResolveRun("00000000-0000-4000-8000-000000000000").status().code(), StatusCode::kNotFound);
  // A UUID given by the caller is kept; a malformed one is refused.
  NewRun given = Traced("cell-b", "", "", {}, "");
  given.uuid = "123e4567-e89b-42d3-a456-426614174000";
  auto id2 = (*store)->BeginRun(given);
  ASSERT_TRUE(id2.ok());
  EXPECT_EQ((*store)->GetRun(*id2)->uuid, given.uuid);
  given.uuid = "not-a-uuid";
  EXPECT_FALSE((*store)->BeginRun(given).ok());
}

TEST(SchemaV5, UuidsAreVersion4AndDistinct) {
  std::set<std::string> seen;
  for (int k = 0; k < 2000; ++k) {
    auto u = NewUuidV4();
    ASSERT_TRUE(u.ok());
    ASSERT_TRUE(LooksLikeUuid(*u)) << *u;
    EXPECT_EQ((*u)[14], '4');
    EXPECT_NE(std::string("89ab").find((*u)[19]), std::string::npos);
    seen.insert(*u);
  }
  EXPECT_EQ(seen.size(), 2000u);
  EXPECT_FALSE(LooksLikeUuid("123e4567e89b42d3a456426614174000"));
  EXPECT_FALSE(LooksLikeUuid("123e4567-e89b-42d3-a456-42661417400g"));
}

TEST(SchemaV5, FiltersFindRunsByEveryField) {
  testing::TempDir dir;
  SteadyClock wall;
  auto store = Store::Open(dir.File("f.db"), wall);
  ASSERT_TRUE(store.ok());
  Store& s = **store;
  auto a = s.BeginRun(Traced("cell-a", "SN-001", "LOT-7", {"incoming"}, "Ann"));
  auto b = s.BeginRun(Traced("cell-b", "SN-002", "LOT-7", {"incoming", "rework"}, "Bob"));
  auto c = s.BeginRun(Traced("cell-c", "XY_100%", "LOT-8", {}, "Ann"));
  ASSERT_TRUE(a.ok() && b.ok() && c.ok());
  ASSERT_OK(s.FinishRun(*a, Outcome::kCompleted, "done"));
  ASSERT_OK(s.FinishRun(*b, Outcome::kAborted, "over temperature"));
  ASSERT_OK(s.FinishRun(*c, Outcome::kCompleted, "done"));
  ASSERT_OK(s.SetVerdict(*a, "pass", "PASS 101 %", 101.0));
  ASSERT_OK(s.SetVerdict(*c, "fail", "FAIL 90 %", 90.0));
  EXPECT_FALSE(s.SetVerdict(*c, "maybe", "", std::nullopt).ok());
  ASSERT_OK(s.db().Exec("UPDATE runs SET started_at='2026-03-01T10:00:00Z' WHERE id=1;"
                        "UPDATE runs SET started_at='2026-03-02T23:59:59Z' WHERE id=2;"
                        "UPDATE runs SET started_at='2026-03-03T00:00:00Z' WHERE id=3;"));
  ASSERT_OK(s.AddNote(*b, "Cell bulged slightly"));
  auto ids = [&](const RunFilter& f) {
    std::vector<int64_t> out;
    auto rows = s.FindRuns(f);
    EXPECT_TRUE(rows.ok()) << rows.status().ToString();
    if (rows.ok())
      for (const RunRow& r : *rows) out.push_back(r.id);
    return out;
  };
  using V = std::vector<int64_t>;
  RunFilter f;
  EXPECT_EQ(ids(f), (V{1, 2, 3}));
  f = {};
  f.cell = "CELL-B";  // case-insensitive
  EXPECT_EQ(ids(f), (V{2}));
  f = {};
  f.cell = "cell-*";
  EXPECT_EQ(ids(f), (V{1, 2, 3}));
  f = {};
  f.cell = "cell";  // whole field, not a substring
  EXPECT_EQ(ids(f), (V{}));
  f = {};
  f.serial = "SN-00?";
  EXPECT_EQ(ids(f), (V{1, 2}));
  f = {};
  f.serial = "XY_100%";  // LIKE's own wildcards are plain characters here
  EXPECT_EQ(ids(f), (V{3}));
  f = {};
  f.serial = "XY%";
  EXPECT_EQ(ids(f), (V{}));
  f = {};
  f.lot = "lot-7";
  EXPECT_EQ(ids(f), (V{1, 2}));
  f = {};
  f.tag = "rework";
  EXPECT_EQ(ids(f), (V{2}));
  f = {};
  f.tag = "incoming";
  f.operator_name = "ann";
  EXPECT_EQ(ids(f), (V{1}));
  f = {};
  f.outcome = Outcome::kAborted;
  EXPECT_EQ(ids(f), (V{2}));
  f = {};
  f.verdict = "pass";
  EXPECT_EQ(ids(f), (V{1}));
  f = {};
  f.procedure = "capacity cell-c";
  EXPECT_EQ(ids(f), (V{3}));
  f = {};
  f.since = "2026-03-02";
  EXPECT_EQ(ids(f), (V{2, 3}));
  f = {};
  f.until = "2026-03-02";  // the whole day
  EXPECT_EQ(ids(f), (V{1, 2}));
  f = {};
  f.since = "2026-03-01T12:00";
  f.until = "2026-03-02T23:59:59Z";
  EXPECT_EQ(ids(f), (V{2}));
  f = {};
  f.text = "bulged";  // in a note
  EXPECT_EQ(ids(f), (V{2}));
  f = {};
  f.text = "temperature";  // in the reason
  EXPECT_EQ(ids(f), (V{2}));
  f = {};
  f.text = "100%";
  EXPECT_EQ(ids(f), (V{3}));
  f = {};
  f.text = "' OR 1=1 --";
  EXPECT_EQ(ids(f), (V{}));
  f = {};
  f.text = s.GetRun(3)->uuid.substr(4, 10);
  EXPECT_EQ(ids(f), (V{3}));
}

}  // namespace
}  // namespace kp
