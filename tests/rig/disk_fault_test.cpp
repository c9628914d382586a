// Disk trouble during a run, injected through a wrapper VFS (the SQLite test
// suite's method: fail the N-th write, N = 1, 2, ... until the run completes):
// the load goes off, the run ends with the reason, the database stays intact
// and no partial batch is ever visible.
#include <gtest/gtest.h>

#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "tests/support/faulty_vfs.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

Plan ShortPlan() {
  Plan p = RatedCapacityPlan(testing::Cell2500());
  p.steps[0].end.time_s = 300;  // 300 samples
  return p;
}

// Reopens with the ordinary VFS and checks the database: intact, samples
// numbered without holes, and the committed progress matching the last
// committed sample (a batch is all or nothing).
void ExpectIntact(const std::string& path) {
  SteadyClock wall;
  auto store = Store::Open(path, wall);
  ASSERT_TRUE(store.ok()) << store.status().ToString();
  auto ic = (*store)->db().Prepare("PRAGMA integrity_check");
  ASSERT_TRUE(ic.ok());
  ASSERT_TRUE(*ic->Step());
  EXPECT_EQ(ic->Text(0), "ok");
  auto runs = (*store)->ListRuns();
  ASSERT_TRUE(runs.ok());
  for (const RunRow& run : *runs) {
    auto samples = (*store)->LoadSamples(run.id);
    ASSERT_TRUE(samples.ok());
    auto q = (*store)->db().Prepare("SELECT COALESCE(MAX(seq), -1) FROM samples WHERE run_id=?1");
    q->Bind(1, run.id);
    ASSERT_TRUE(*q->Step());
    EXPECT_EQ(q->Int(0) + 1, static_cast<int64_t>(samples->size()));
    auto prog = (*store)->LoadProgress(run.id);
    ASSERT_TRUE(prog.ok());
    if (*prog && !samples->empty()) {
      EXPECT_EQ((*prog)->t_s, samples->back().t_s);
    }
  }
}

struct Outcome_ {
  bool recorded = false;  // Execute returned a RunResult
  RunResult result;
  bool load_on = true;
};

Outcome_ RunWithFault(const std::string& path, testing::FaultyVfs& vfs, int64_t n, int rc, bool one_shot) {
  Outcome_ o;
  VirtualClock clock;  // also times the batch commits: one every 10 simulated seconds
  Store::Options so;
  so.vfs = vfs.name();
  so.commit_interval_s = 10;
  auto store = Store::Open(path, clock, so);
  EXPECT_TRUE(store.ok()) << store.status().ToString();
  if (!store.ok()) return o;
  SimRig rig(clock, sim::DemoLiIonCell(2.56));
  RunController rc_(**store, clock, rig.roles());
  vfs.FailWrite(n, rc, one_shot);
  auto r = rc_.Execute(ShortPlan(), {});
  o.load_on = rig.bench().load_input_on();
  if (r.ok()) {
    o.recorded = true;
    o.result = *r;
  } else {
    EXPECT_EQ(r.status().code(), StatusCode::kIo) << r.status().ToString();
  }
  store->reset();
  vfs.Heal();
  return o;
}

TEST(DiskFault, FullDiskAtEveryWriteEndsTheRunCleanly) {
  testing::FaultyVfs vfs("kp-full-disk");
  int aborted = 0;
  for (int64_t n = 1;; n += n < 40 ? 1 : 3) {
    ASSERT_LT(n, 2000) << "the run never completed";
    testing::TempDir dir;
    Outcome_ o = RunWithFault(dir.File("f.db"), vfs, n, SQLITE_FULL, false);
    EXPECT_FALSE(o.load_on) << "write " << n;
    ExpectIntact(dir.File("f.db"));
    if (::testing::Test::HasFailure()) return;
    if (o.recorded && o.result.outcome == Outcome::kCompleted) {
      std::printf("full disk injected from write 1 to %lld: %d runs ended as aborted, then completed\n",
                  static_cast<long long>(n - 1), aborted);
      break;
    }
    if (o.recorded) {
      ASSERT_EQ(o.result.outcome, Outcome::kAborted);
      EXPECT_NE(o.result.reason.find("database or disk is full"), std::string::npos) << o.result.reason;
      ++aborted;
    }
  }
  EXPECT_GE(aborted, 20);
}

TEST(DiskFault, OneFailedWriteIsRecordedAsTheReason) {
  testing::FaultyVfs vfs("kp-one-shot");
  int recorded_in_db = 0;
  for (int64_t n : {3, 9, 20, 40, 60}) {
    testing::TempDir dir;
    Outcome_ o = RunWithFault(dir.File("g.db"), vfs, n, SQLITE_IOERR_WRITE, true);
    EXPECT_FALSE(o.load_on);
    ExpectIntact(dir.File("g.db"));
    if (!o.recorded) continue;  // failed while creating the run record
    ASSERT_EQ(o.result.outcome, Outcome::kAborted) << "write " << n;
    SteadyClock wall;
    auto store = Store::Open(dir.File("g.db"), wall);
    ASSERT_TRUE(store.ok());
    auto row = (*store)->GetRun(o.result.run_id);
    ASSERT_TRUE(row.ok());
    // The disk recovered, so the end and its reason are in the log.
    EXPECT_EQ(row->outcome, Outcome::kAborted);
    EXPECT_NE(row->reason.find("disk I/O error"), std::string::npos) << row->reason;
    ++recorded_in_db;
  }
  EXPECT_GE(recorded_in_db, 3);
}

TEST(DiskFault, ReadOnlyFileMidRunAbortsWithLoadOff) {
  testing::FaultyVfs vfs("kp-read-only");
  testing::TempDir dir;
  // Write 60: past the run record (with its equipment rows, schema v5) into the samples.
  Outcome_ o = RunWithFault(dir.File("h.db"), vfs, 60, SQLITE_READONLY, false);
  ASSERT_TRUE(o.recorded);
  EXPECT_FALSE(o.load_on);
  EXPECT_EQ(o.result.outcome, Outcome::kAborted);
  EXPECT_NE(o.result.reason.find("database write failed"), std::string::npos) << o.result.reason;
  EXPECT_NE(o.result.reason.find("could not record the end"), std::string::npos) << o.result.reason;
  ExpectIntact(dir.File("h.db"));
}

}  // namespace
}  // namespace kp
