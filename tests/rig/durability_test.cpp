// Schema migration, the one-runner-per-rig lock, control requests, resume
// refusals and concurrent readers.
#include <gtest/gtest.h>
#include <sqlite3.h>

#include <atomic>
#include <set>
#include <thread>

#include "rig/control_channel.h"
#include "rig/resume.h"
#include "rig/run_controller.h"
#include "rig/run_lock.h"
#include "rig/sim_rig.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

using testing::Cell2500;

// The tables as schema version 1 created them, with one finished run.
constexpr const char* kVersion1Db = R"sql(
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
  INSERT INTO runs(id, cell_id, procedure_name, procedure_text, rig, rated_mah, started_at, ended_at, outcome)
    VALUES(1, 1, 'p', 'text', 'sim', 2500, '2026-01-01T00:00:00Z', '2026-01-01T05:00:00Z', 'completed');
  INSERT INTO samples VALUES(1, 0, 1.0, 4.1, 0.5, 22.0, 0), (1, 1, 2.0, 4.09, 0.5, 22.1, 0);
  PRAGMA user_version=1;
)sql";

void MakeVersion1Db(const std::string& path, const std::string& extra_sql = "") {
  auto db = sql::Db::Open(path, true);
  ASSERT_TRUE(db.ok());
  ASSERT_OK((*db)->Exec(kVersion1Db));
  if (!extra_sql.empty()) ASSERT_OK((*db)->Exec(extra_sql));
}

// Step rows written before step records: the cycle is derived from the kinds
// (a charge opens cycle 1), mode and level stay unknown and the rows say so.
TEST(Migration, OldStepRowsGetTheirCycleAndAreMarkedMigrated) {
  testing::TempDir dir;
  MakeVersion1Db(dir.File("v1.db"), R"sql(
    INSERT INTO steps VALUES(1, 0, 0, 'constant-current discharge', 'pre', 0, 10, 'time'),
                            (1, 1, 1, 'charge', 'charge', 10, 20, 'current'),
                            (1, 2, 2, 'charge', 'top up', 20, 25, 'current'),
                            (1, 3, 3, 'rest', 'rest', 25, 30, 'time'),
                            (1, 4, 4, 'constant-current discharge', 'main', 30, 40, 'voltage 2.749 V <= 2.750 V'),
                            (1, 5, 5, 'charge', 'again', 40, 50, 'current');
  )sql");
  SteadyClock wall;
  auto store = Store::Open(dir.File("v1.db"), wall);
  ASSERT_TRUE(store.ok()) << store.status().ToString();
  auto steps = (*store)->LoadSteps(1);
  ASSERT_TRUE(steps.ok());
  ASSERT_EQ(steps->size(), 6u);
  const int cycles[] = {0, 1, 1, 1, 1, 2};
  for (size_t k = 0; k < 6; ++k) {
    EXPECT_EQ((*steps)[k].cycle, cycles[k]) << "row " << k;
    EXPECT_TRUE((*steps)[k].migrated);
    EXPECT_FALSE((*steps)[k].level.has_value());
  }
  auto totals = (*store)->LoadRunTotals(1);
  ASSERT_TRUE(totals.ok());
  EXPECT_FALSE(totals->delivered_mah.has_value());  // not known for old runs
}

TEST(Migration, Version1DatabaseIsUpgradedKeepingItsData) {
  testing::TempDir dir;
  MakeVersion1Db(dir.File("v1.db"));
  SteadyClock wall;
  auto store = Store::Open(dir.File("v1.db"), wall);
  ASSERT_TRUE(store.ok()) << store.status().ToString();
  EXPECT_EQ(*(*store)->SchemaVersion(), kSchemaVersion);
  auto run = (*store)->GetRun(1);
  ASSERT_TRUE(run.ok());
  EXPECT_EQ(run->cell, "old-cell");
  EXPECT_EQ(run->sample_count, 2);
  auto progress = (*store)->LoadProgress(1);
  ASSERT_TRUE(progress.ok());
  EXPECT_FALSE(progress->has_value());  // the new column exists, empty for old runs
}

TEST(Migration, FailedUpgradeLeavesTheDatabaseUntouched) {
  testing::TempDir dir;
  // A column the v2 migration adds already exists: its ALTER fails midway.
  MakeVersion1Db(dir.File("bad.db"), "ALTER TABLE runs ADD COLUMN resumes INTEGER;");
  SteadyClock wall;
  auto store = Store::Open(dir.File("bad.db"), wall);
  ASSERT_FALSE(store.ok());
  EXPECT_NE(store.status().message().find("schema version 2"), std::string::npos) << store.status().ToString();
  auto db = sql::Db::Open(dir.File("bad.db"), false);
  ASSERT_TRUE(db.ok());
  auto v = (*db)->Prepare("PRAGMA user_version");
  ASSERT_TRUE(*v->Step());
  EXPECT_EQ(v->Int(0), 1);
  // The columns added before the failing one were rolled back too.
  auto cols = (*db)->Prepare("SELECT COUNT(*) FROM pragma_table_info('runs') WHERE name='engine_snapshot'");
  ASSERT_TRUE(*cols->Step());
  EXPECT_EQ(cols->Int(0), 0);
}

TEST(RunLockTest, SecondRunnerOnTheSameRigIsRefused) {
  testing::TempDir dir;
  auto first = RunLock::Acquire("tcp:192.168.0.7:5025|serial:/dev/ttyUSB0", "run 3 in lab.db", dir.File("locks"));
  ASSERT_TRUE(first.ok()) << first.status().ToString();
  auto second = RunLock::Acquire("tcp:192.168.0.7:5025|serial:/dev/ttyUSB0", "run 4 in lab.db", dir.File("locks"));
  ASSERT_FALSE(second.ok());
  EXPECT_EQ(second.status().code(), StatusCode::kUnavailable);
  EXPECT_NE(second.status().message().find("run 3 in lab.db"), std::string::npos) << second.status().message();
  EXPECT_NE(second.status().message().find("already driven"), std::string::npos);
  EXPECT_TRUE(RunLock::Acquire("sim", "other rig", dir.File("locks")).ok());
  first->reset();
  EXPECT_TRUE(RunLock::Acquire("tcp:192.168.0.7:5025|serial:/dev/ttyUSB0", "run 4", dir.File("locks")).ok());
}

struct Bench {
  testing::TempDir dir;
  SteadyClock wall;
  VirtualClock clock;
  std::unique_ptr<Store> store;
  std::unique_ptr<SimRig> rig;
  explicit Bench(double initial_soc = 1.0) {
    auto s = Store::Open(dir.File("run.db"), wall);
    EXPECT_TRUE(s.ok());
    store = std::move(*s);
    sim::CellParams cell = sim::DemoLiIonCell(2.56);
    cell.initial_soc = initial_soc;
    rig = std::make_unique<SimRig>(clock, cell);
  }
};

Plan TimedPlan(double seconds) {
  Plan p = RatedCapacityPlan(Cell2500());
  p.steps[0].end.time_s = seconds;
  return p;
}

TEST(Control, PauseHoldsTheLoadOffAndStopsTheStepClock) {
  Bench b;
  ControlChannel channel(*b.store, b.clock);  // polls once per simulated 0.25 s: every 1 s sample
  RunController rc(*b.store, b.clock, b.rig->roles());
  RunOptions o;
  o.control = &channel;
  int64_t run = 0;
  int sent = 0;  // requests go out at the first readings at or after 100, 150 and 400 s
  o.on_sample = [&](const Reading& r, double) {
    if (run == 0) run = b.store->ListRuns()->back().id;
    if (sent == 0 && r.t_s >= 100) {
      ++sent;
      ASSERT_OK(ControlChannel::Request(*b.store, run, ControlAction::kPause, "tester@bench"));
    } else if (sent == 1 && r.t_s >= 150) {
      ++sent;
      ASSERT_OK(ControlChannel::Request(*b.store, run, ControlAction::kPause, "tester@bench"));  // already paused
    } else if (sent == 2 && r.t_s >= 400) {
      ++sent;
      ASSERT_OK(ControlChannel::Request(*b.store, run, ControlAction::kContinue, "other@pc"));
    }
  };
  auto r = rc.Execute(TimedPlan(600), o);
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->outcome, Outcome::kCompleted) << r->reason;
  EXPECT_FALSE(b.rig->bench().load_input_on());
  auto samples = *b.store->LoadSamples(r->run_id);
  // 600 s of step time plus the 300 s paused.
  EXPECT_NEAR(samples.back().t_s, 900, 1.01);
  for (const Sample& s : samples) {
    if (s.t_s > 101.5 && s.t_s < 400.5) {
      EXPECT_LT(std::abs(s.current_a), 1e-6) << "t=" << s.t_s;
    }
    if (s.t_s > 402 || (s.t_s > 0.01 && s.t_s < 100)) {  // t = 0 is the open-circuit reading
      EXPECT_NEAR(s.current_a, 0.5, 1e-3) << "t=" << s.t_s;
    }
  }
  std::string log;
  auto events = b.store->LoadEvents(r->run_id);
  ASSERT_TRUE(events.ok());
  for (const EventRow& e : *events) log += e.kind + ": " + e.message + "\n";
  EXPECT_NE(log.find("control: paused by tester@bench"), std::string::npos) << log;
  EXPECT_NE(log.find("control: pause by tester@bench ignored: run is paused"), std::string::npos) << log;
  EXPECT_NE(log.find("control: continued by other@pc"), std::string::npos) << log;
}

TEST(Control, AbortActsWithinOneSamplePeriodAndNamesWhoAsked) {
  Bench b;
  ControlChannel channel(*b.store, b.clock);  // polls once per simulated 0.25 s: every 1 s sample
  RunController rc(*b.store, b.clock, b.rig->roles());
  RunOptions o;
  o.control = &channel;
  double asked_at = -1;
  o.on_sample = [&](const Reading& r, double) {
    if (asked_at < 0 && r.t_s >= 250) {
      asked_at = r.t_s;
      ASSERT_OK(ControlChannel::Request(*b.store, b.store->ListRuns()->back().id, ControlAction::kAbort, "alice@lab"));
    }
  };
  auto r = rc.Execute(TimedPlan(600), o);
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->outcome, Outcome::kAborted);
  EXPECT_EQ(r->reason, "aborted by alice@lab");
  EXPECT_FALSE(b.rig->bench().load_input_on());
  EXPECT_EQ(b.store->LoadSamples(r->run_id)->back().t_s, asked_at);  // no sample after the request
  EXPECT_TRUE(b.store->PendingRequests(r->run_id)->empty());
  // A finished run takes no more requests.
  Status late = ControlChannel::Request(*b.store, r->run_id, ControlAction::kPause, "bob");
  EXPECT_EQ(late.code(), StatusCode::kInvalidInput);
  EXPECT_NE(late.message().find("aborted"), std::string::npos) << late.message();
}

// A run left as a crashed runner leaves it: running, by a process that is gone.
int64_t InterruptedRun(Bench& b, double stop_at_s) {
  RunController rc(*b.store, b.clock, b.rig->roles());
  std::atomic<bool> stop{false};
  RunOptions o;
  o.stop = &stop;
  o.on_sample = [&](const Reading& r, double) {
    if (r.t_s >= stop_at_s) stop = true;
  };
  auto r = rc.Execute(RatedCapacityPlan(Cell2500()), o);
  EXPECT_TRUE(r.ok());
  EXPECT_OK(b.store->db().Exec("UPDATE runs SET outcome='running', ended_at=NULL, runner_pid=2147483646"));
  return r->run_id;
}

TEST(Resume, RefusesARunThatIsNotInterrupted) {
  Bench b;
  RunController rc(*b.store, b.clock, b.rig->roles());
  auto r = rc.Execute(TimedPlan(30), {});
  ASSERT_TRUE(r.ok());
  auto point = PrepareResume(*b.store, r->run_id, RatedCapacityPlan(Cell2500()), b.rig->roles());
  ASSERT_FALSE(point.ok());
  EXPECT_NE(point.status().message().find("is completed; only an interrupted run can be resumed"), std::string::npos)
      << point.status().message();
}

TEST(Resume, RefusesAChangedProcedure) {
  Bench b;
  int64_t run = InterruptedRun(b, 100);
  std::string other = "cell li-ion rated 3000 mAh\n";
  auto p = ResumablePlan(*b.store, run, RebuildBuiltInPlan, &other);
  ASSERT_FALSE(p.ok());
  EXPECT_NE(p.status().message().find("procedure changed"), std::string::npos) << p.status().message();
  // The stored text itself edited: the rebuilt built-in no longer matches it.
  ASSERT_OK(b.store->db().Exec("UPDATE runs SET procedure_text = procedure_text || '# edited' || char(10)"));
  p = ResumablePlan(*b.store, run, RebuildBuiltInPlan);
  ASSERT_FALSE(p.ok());
  EXPECT_NE(p.status().message().find("procedure changed"), std::string::npos) << p.status().message();
}

TEST(Resume, RefusesACellAlreadyBelowCutoff) {
  Bench b;
  int64_t run = InterruptedRun(b, 100);
  auto plan = ResumablePlan(*b.store, run, RebuildBuiltInPlan);
  ASSERT_TRUE(plan.ok()) << plan.status().ToString();
  VirtualClock clock;
  sim::CellParams flat = sim::DemoLiIonCell(2.56);
  flat.initial_soc = 0.0;
  SimRig drained(clock, flat);
  auto point = PrepareResume(*b.store, run, *plan, drained.roles());
  ASSERT_FALSE(point.ok());
  EXPECT_NE(point.status().message().find("cutoff"), std::string::npos) << point.status().message();
  EXPECT_FALSE(drained.bench().load_input_on());
  EXPECT_EQ(b.store->GetRun(run)->outcome, Outcome::kInterrupted);  // untouched, can still be resumed later
}

TEST(Resume, ContinuesTheStepWithChargeCarriedOverAndLogsTheGap) {
  Bench b;
  int64_t run = InterruptedRun(b, 3600);
  auto before = *b.store->LoadProgress(run);
  ASSERT_TRUE(before.has_value());
  auto plan = ResumablePlan(*b.store, run, RebuildBuiltInPlan);
  ASSERT_TRUE(plan.ok()) << plan.status().ToString();
  // Same cell, same state (the simulated rig of Bench kept it).
  auto point = PrepareResume(*b.store, run, *plan, b.rig->roles());
  ASSERT_TRUE(point.ok()) << point.status().ToString();
  RunController rc(*b.store, b.clock, b.rig->roles());
  RunOptions o;
  o.resume = &*point;
  auto r = rc.Execute(*plan, o);
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->outcome, Outcome::kCompleted) << r->reason;
  EXPECT_EQ(r->run_id, run);
  auto after = *b.store->LoadProgress(run);
  // Reference: the same cell uninterrupted delivers 2548.6 mAh (see the
  // RunController suite); both parts together must give that.
  Bench ref;
  RunController rc2(*ref.store, ref.clock, ref.rig->roles());
  auto rr = rc2.Execute(RatedCapacityPlan(Cell2500()), {});
  ASSERT_TRUE(rr.ok());
  double ref_mah = ref.store->LoadProgress(rr->run_id)->value().delivered_mah;
  EXPECT_NEAR(after->delivered_mah, ref_mah, 0.001 * ref_mah);
  EXPECT_GT(after->delivered_mah, before->delivered_mah + 1000);
  bool gap = false;
  auto events = b.store->LoadEvents(run);
  ASSERT_TRUE(events.ok());
  for (const EventRow& e : *events) gap |= e.kind == "gap" && e.message.find("mAh") != std::string::npos;
  EXPECT_TRUE(gap);
  // Resuming a run twice is refused.
  EXPECT_FALSE(PrepareResume(*b.store, run, *plan, b.rig->roles()).ok());
}

// A reader in WAL mode: it never sees part of a batch, and while it holds a
// read snapshot the runner keeps committing (busy timeout 0: any wait would
// be an error).
TEST(Concurrency, ReaderNeverBlocksTheRunnerNorSeesATornBatch) {
  testing::TempDir dir;
  SteadyClock wall;
  Store::Options so;
  so.commit_interval_s = 0;  // commit at every MaybeCommit
  auto writer = Store::Open(dir.File("c.db"), wall, so);
  ASSERT_TRUE(writer.ok());
  sqlite3_busy_timeout((*writer)->db().raw(), 0);
  auto run = (*writer)->BeginRun({"c", "li-ion", 2500, "p", "t", "sim"});
  ASSERT_TRUE(run.ok());
  auto reader = Store::Open(dir.File("c.db"), wall);
  ASSERT_TRUE(reader.ok());

  // Deterministic part: a snapshot held open across several commits.
  ASSERT_OK((*reader)->db().Exec("BEGIN"));
  auto count = [&](Store& s) {
    auto q = s.db().Prepare("SELECT COUNT(*) FROM samples");
    EXPECT_TRUE(*q->Step());
    return q->Int(0);
  };
  EXPECT_EQ(count(**reader), 0);
  int seq = 0;
  auto write_batch = [&](int n) {
    for (int i = 0; i < n; ++i, ++seq) ASSERT_OK((*writer)->StageSample(*run, {seq * 1.0, 4.0, 0.5, 22.0, 0}));
    (*writer)->SetProgress(*run, {"v1 step=0 elapsed=0 charge=0 energy=0", (seq - 1) * 1.0, 0, 0});
    ASSERT_OK((*writer)->Commit());
  };
  for (int k = 0; k < 5; ++k) write_batch(100);
  EXPECT_EQ(count(**reader), 0);  // still its snapshot
  ASSERT_OK((*reader)->db().Exec("COMMIT"));
  EXPECT_EQ(count(**reader), 500);

  // Threaded part: batches of 37 samples; every snapshot the reader takes must
  // hold whole batches, with the progress row matching the last sample.
  std::atomic<bool> done{false};
  std::atomic<int> looks{0}, torn{0};
  std::thread t([&] {
    while (!done.load()) {
      if (!(*reader)->db().Exec("BEGIN").ok()) continue;
      auto q = (*reader)->db().Prepare("SELECT COUNT(*), MAX(t_s), (SELECT progress_t_s FROM runs WHERE id=?1) FROM samples");
      q->Bind(1, *run);
      if (q->Step().ok()) {
        int64_t n = q->Int(0);
        if ((n - 500) % 37 != 0 || q->Real(1) != q->Real(2)) ++torn;
        ++looks;
      }
      (void)(*reader)->db().Exec("COMMIT");
      auto latest = (*reader)->LatestSamples(*run, 10);
      if (!latest.ok()) ++torn;
    }
  });
  for (int k = 0; k < 120 || looks.load() < 50; ++k) write_batch(37);
  done = true;
  t.join();
  EXPECT_EQ(torn.load(), 0);
  EXPECT_GE(looks.load(), 50);
}

}  // namespace
}  // namespace kp
