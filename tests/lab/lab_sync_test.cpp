// The lab sync against a real PostgreSQL server started by the test fixture
// (tests/support/pg_server.h): schema creation and migration, idempotent
// re-sync, resume after sync processes killed mid-batch (seeded), and a
// background sync that rides out the server going away while a run logs.
#include <gtest/gtest.h>

#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <fstream>
#include <random>
#include <thread>

#include "rig/lab/lab_schema.h"
#include "rig/lab/lab_sync.h"
#include "rig/lab/pg.h"
#include "rig/store.h"
#include "tests/lab/lab_test_support.h"
#include "tests/support/fixtures.h"
#include "tests/support/pg_server.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

using lab::testing::Bench;
using lab::testing::Count;
using lab::testing::SharedServer;

int64_t PgInt(pg::PgConn& c, const std::string& sql) {
  auto r = c.Query(sql);
  EXPECT_TRUE(r.ok()) << r.status().ToString();
  if (!r.ok() || r->rows() == 0 || r->IsNull(0, 0)) return -1;
  return r->Int(0, 0);
}

// Every run of the bench on the server with all its rows, no gap in the
// sample numbering and the same values.
void ExpectSameAsBench(Bench& bench, pg::PgConn& c) {
  sql::Db& db = bench.db();
  EXPECT_EQ(Count(db, "SELECT COUNT(*) FROM runs"), PgInt(c, "SELECT COUNT(*) FROM kneepoint.runs"));
  for (const char* t : {"samples", "steps", "events", "sample_blocks", "instruments", "run_tags"}) {
    EXPECT_EQ(Count(db, fmt::format("SELECT COUNT(*) FROM {}", t)), PgInt(c, fmt::format("SELECT COUNT(*) FROM kneepoint.{}", t))) << t;
  }
  // No gaps: per run, count = largest seq + 1.
  EXPECT_EQ(0, PgInt(c, "SELECT COUNT(*) FROM (SELECT run_uuid FROM kneepoint.samples GROUP BY run_uuid "
                        "HAVING COUNT(*) <> MAX(seq) + 1) g"));
  // Same values (a checksum over every sample, exact in binary64 order-independent
  // enough for equal sets: the sums run in seq order on both sides).
  const std::string sum_sql = "SUM(seq * 1.0 + voltage_v * 3 + current_a * 7 + temperature_c * 11 + step * 13)";
  auto q = db.Prepare("SELECT " + sum_sql + " FROM (SELECT * FROM samples ORDER BY run_id, seq)");
  ASSERT_TRUE(q.ok());
  ASSERT_TRUE(*q->Step());
  auto r = c.Query("SELECT " + sum_sql + "::float8 FROM kneepoint.samples");
  ASSERT_TRUE(r.ok());
  EXPECT_NEAR(q->Real(0), r->Real(0, 0), 1e-6 * std::abs(q->Real(0)));
}

TEST(LabSync, CreatesTheSchemaAndCopiesEveryRun) {
  Bench bench;
  bench.Run("bench A", 2);
  auto url = SharedServer().NewDatabase();
  ASSERT_TRUE(url.ok()) << url.status().ToString();
  auto stats = lab::SyncOnce(bench.path(), *url);
  ASSERT_TRUE(stats.ok()) << stats.status().ToString();
  EXPECT_EQ(stats->runs, 2);
  EXPECT_EQ(stats->runs_sent, 2);
  EXPECT_GT(stats->samples, 100);
  auto c = pg::PgConn::Connect(*url);
  ASSERT_TRUE(c.ok());
  EXPECT_EQ(PgInt(**c, "SELECT MAX(version) FROM kneepoint.schema_version"), lab::kLabSchemaVersion);
  ExpectSameAsBench(bench, **c);
  auto b = (*c)->Query("SELECT DISTINCT bench FROM kneepoint.runs");
  ASSERT_TRUE(b.ok());
  ASSERT_EQ(b->rows(), 1);
  EXPECT_EQ(b->Text(0, 0), "bench A");
}

TEST(LabSync, ReSyncIsIdempotent) {
  Bench bench;
  bench.Run("bench B", 1);
  auto url = SharedServer().NewDatabase();
  ASSERT_TRUE(url.ok());
  ASSERT_TRUE(lab::SyncOnce(bench.path(), *url).ok());
  // Nothing changed: nothing sent.
  auto again = lab::SyncOnce(bench.path(), *url);
  ASSERT_TRUE(again.ok());
  EXPECT_EQ(again->runs_sent, 0);
  EXPECT_EQ(again->rows, 0);
  // The server forgets its fingerprints and what it has of the samples' tail:
  // everything is offered again and nothing is doubled.
  auto c = pg::PgConn::Connect(*url);
  ASSERT_TRUE(c.ok());
  ASSERT_OK((*c)->Exec("UPDATE kneepoint.runs SET sync_mark = ''"));
  const int64_t before = PgInt(**c, "SELECT COUNT(*) FROM kneepoint.samples");
  ASSERT_OK((*c)->Exec("DELETE FROM kneepoint.samples WHERE seq >= 50"));
  auto third = lab::SyncOnce(bench.path(), *url);
  ASSERT_TRUE(third.ok()) << third.status().ToString();
  EXPECT_EQ(third->runs_sent, 1);
  EXPECT_EQ(third->samples, before - 50);
  ExpectSameAsBench(bench, **c);
  // A second bench database sent to the same server adds its runs beside.
  Bench other;
  other.Run("bench C", 1);
  ASSERT_TRUE(lab::SyncOnce(other.path(), *url).ok());
  EXPECT_EQ(PgInt(**c, "SELECT COUNT(DISTINCT bench) FROM kneepoint.runs"), 2);
}

TEST(LabSync, TwoSyncsOfOneBenchNeverDoubleARow) {
  // Samples go straight into the lab table above what the server holds; a
  // second sync of the same bench that got ahead meanwhile makes that COPY
  // meet keys already there, and the batch goes through the merge instead.
  Bench bench;
  bench.Run("bench T", 1);
  const int64_t total = Count(bench.db(), "SELECT COUNT(*) FROM samples");
  auto url = SharedServer().NewDatabase();
  ASSERT_TRUE(url.ok());
  lab::SyncOptions o;
  o.batch_rows = 97;
  bool other_ran = false;
  o.before_batch = [&](int64_t batch) {
    if (batch != 3 || other_ran) return;
    other_ran = true;
    auto other = lab::SyncOnce(bench.path(), *url);  // the whole bench, committed before this batch goes
    ASSERT_TRUE(other.ok()) << other.status().ToString();
    EXPECT_EQ(other->samples, total - 2 * 97);
  };
  auto first = lab::SyncOnce(bench.path(), *url, o);
  ASSERT_TRUE(first.ok()) << first.status().ToString();
  EXPECT_TRUE(other_ran);
  auto c = pg::PgConn::Connect(*url);
  ASSERT_TRUE(c.ok());
  EXPECT_EQ(PgInt(**c, "SELECT COUNT(*) FROM kneepoint.samples"), total);
  ExpectSameAsBench(bench, **c);
}

TEST(LabSync, ResumesAfterSyncProcessesKilledMidBatch) {
  Bench bench;
  bench.Run("bench K", 2);
  const int64_t total = Count(bench.db(), "SELECT COUNT(*) FROM samples");
  auto url = SharedServer().NewDatabase();
  ASSERT_TRUE(url.ok());
  auto c = pg::PgConn::Connect(*url);
  ASSERT_TRUE(c.ok());
  constexpr int kBatch = 97;
  const int64_t batches = total / kBatch + 8;  // an upper bound on one pass's batches
  std::mt19937 rng(20261202);  // seeded: the same kills every time
  int killed = 0;
  for (int k = 0; k < 20; ++k) {
    const int64_t die_at = std::uniform_int_distribution<int64_t>(1, 4)(rng);
    (void)batches;
    const pid_t pid = fork();
    ASSERT_GE(pid, 0);
    if (pid == 0) {
      lab::SyncOptions o;
      o.batch_rows = kBatch;
      o.after_copy = [die_at](int64_t batch) {
        if (batch == die_at) raise(SIGKILL);  // mid-batch: copied into staging, not committed
      };
      auto st = lab::SyncOnce(bench.path(), *url, o);
      _exit(st.ok() ? 0 : 3);
    }
    int status = 0;
    ASSERT_EQ(waitpid(pid, &status, 0), pid);
    if (WIFSIGNALED(status) && WTERMSIG(status) == SIGKILL) ++killed;
    else ASSERT_TRUE(WIFEXITED(status) && WEXITSTATUS(status) == 0) << "child status " << status;
    // After every kill: never a gap, never a duplicate.
    EXPECT_EQ(0, PgInt(**c, "SELECT COUNT(*) FROM (SELECT run_uuid FROM kneepoint.samples GROUP BY run_uuid "
                            "HAVING COUNT(*) <> MAX(seq) + 1) g"));
  }
  EXPECT_GE(killed, 15);  // most passes die (the last ones may have too little left to die in)
  EXPECT_GT(PgInt(**c, "SELECT COUNT(*) FROM kneepoint.samples"), 0);
  auto done = lab::SyncOnce(bench.path(), *url);
  ASSERT_TRUE(done.ok()) << done.status().ToString();
  EXPECT_EQ(PgInt(**c, "SELECT COUNT(*) FROM kneepoint.samples"), total);
  ExpectSameAsBench(bench, **c);
}

TEST(LabSync, MigratesAnOlderLabSchema) {
  auto url = SharedServer().NewDatabase();
  ASSERT_TRUE(url.ok());
  auto c = pg::PgConn::Connect(*url);
  ASSERT_TRUE(c.ok());
  ASSERT_OK(lab::MigrateLab(**c, 1));
  ASSERT_EQ(*lab::LabSchemaVersion(**c), 1);
  // A run a version-1 kneepoint had sent.
  ASSERT_OK((*c)->Exec(
      "INSERT INTO kneepoint.runs (uuid, bench, bench_run_id, cell, chemistry, cell_rated_mah, cell_created_at, procedure_name, "
      "procedure_text, rig, rated_mah, started_at, outcome) VALUES ('0b6d3c56-33a5-4f4e-9a53-4b2b4f1c7a10', 'old bench', 7, "
      "'cell-7', 'li-ion', 2500, '2026-01-05T08:00:00Z', 'old', 'cell li-ion', 'sim', 2500, '2026-01-05T08:00:00Z', 'completed')"));
  ASSERT_OK((*c)->Exec("INSERT INTO kneepoint.samples VALUES ('0b6d3c56-33a5-4f4e-9a53-4b2b4f1c7a10', 0, 0, 4.1, 2.5, 25, 0)"));
  EXPECT_EQ(PgInt(**c, "SELECT COUNT(*) FROM information_schema.tables WHERE table_schema = 'kneepoint' AND table_name = 'sample_blocks'"), 0);
  Bench bench;
  bench.Run("bench M", 1);
  auto st = lab::SyncOnce(bench.path(), *url);
  ASSERT_TRUE(st.ok()) << st.status().ToString();
  EXPECT_EQ(*lab::LabSchemaVersion(**c), 2);
  EXPECT_EQ(PgInt(**c, "SELECT COUNT(*) FROM kneepoint.schema_version"), 2);
  EXPECT_EQ(PgInt(**c, "SELECT COUNT(*) FROM kneepoint.runs"), 2);
  EXPECT_EQ(PgInt(**c, "SELECT COUNT(*) FROM kneepoint.samples WHERE run_uuid = '0b6d3c56-33a5-4f4e-9a53-4b2b4f1c7a10'"), 1);
  EXPECT_GT(PgInt(**c, "SELECT COUNT(*) FROM kneepoint.sample_blocks"), 0);
  // A newer lab schema than this kneepoint's is refused, not written.
  ASSERT_OK((*c)->Exec("INSERT INTO kneepoint.schema_version(version) VALUES (99)"));
  auto refused = lab::SyncOnce(bench.path(), *url);
  ASSERT_FALSE(refused.ok());
  EXPECT_NE(refused.status().message().find("newer"), std::string::npos) << refused.status().ToString();
}

TEST(LabSync, BackgroundSyncRidesOutAServerOutageWhileTheRunLogs) {
  auto server = testing::PgServer::Start();
  ASSERT_TRUE(server.ok()) << server.status().ToString();
  auto url = (*server)->NewDatabase();
  ASSERT_TRUE(url.ok());
  testing::StoreFixture f("bench.db");
  NewRun nr;
  nr.cell_name = "cell-outage";
  nr.chemistry = "li-ion";
  nr.rated_mah = 2500;
  nr.procedure_name = "outage";
  nr.procedure_text = "cell li-ion";
  nr.rig = "sim";
  nr.bench = "bench O";
  auto run = f.store->BeginRun(nr);
  ASSERT_TRUE(run.ok());
  std::vector<std::string> log;
  std::mutex log_mu;
  lab::BackgroundSync bg(f.dir.File("bench.db"), *url, [&](const std::string& m) {
    std::lock_guard<std::mutex> l(log_mu);
    log.push_back(m);
  }, 0.05, 0.2);
  bg.Start();
  int64_t seq = 0;
  auto write = [&](int n) {
    for (int i = 0; i < n; ++i, ++seq) ASSERT_OK(f.store->AppendSample(*run, Sample{seq * 1.0, 4.0 - seq * 1e-4, 2.5, 25.0, 0}));
    ASSERT_OK(f.store->Commit());
  };
  auto c = pg::PgConn::Connect(*url);
  ASSERT_TRUE(c.ok());
  auto server_has = [&](int64_t n) {
    for (int i = 0; i < 400; ++i) {
      // Quietly: the schema appears with the first pass.
      auto conn = pg::PgConn::Connect(*url);
      if (conn.ok()) {
        auto r = (*conn)->Query("SELECT COUNT(*) FROM kneepoint.samples");
        if (r.ok() && r->Int(0, 0) == n) return true;
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(25));
    }
    return false;
  };
  write(500);
  ASSERT_TRUE(server_has(500)) << [&] {
    std::lock_guard<std::mutex> l(log_mu);
    std::string all;
    for (const std::string& m : log) all += m + "\n";
    return all;
  }();
  c->reset();
  ASSERT_OK((*server)->Stop());
  // The run goes on while the server is away; the writer is never held up.
  const auto t0 = std::chrono::steady_clock::now();
  write(700);
  std::this_thread::sleep_for(std::chrono::milliseconds(400));
  write(300);
  EXPECT_LT(std::chrono::steady_clock::now() - t0, std::chrono::seconds(5));
  EXPECT_GT(bg.passes_failed(), 0);
  ASSERT_OK((*server)->StartAgain());
  write(200);
  ASSERT_OK(f.store->FinishRun(*run, Outcome::kCompleted, "all steps done"));
  bg.Stop(20.0);
  auto after = pg::PgConn::Connect(*url);
  ASSERT_TRUE(after.ok());
  EXPECT_EQ(PgInt(**after, "SELECT COUNT(*) FROM kneepoint.samples"), 1700);
  EXPECT_EQ(PgInt(**after, "SELECT MAX(seq) FROM kneepoint.samples"), 1699);
  auto o = (*after)->Query("SELECT outcome FROM kneepoint.runs");
  ASSERT_TRUE(o.ok());
  ASSERT_EQ(o->rows(), 1);
  EXPECT_EQ(o->Text(0, 0), "completed");
  std::lock_guard<std::mutex> l(log_mu);
  ASSERT_FALSE(log.empty());
  EXPECT_NE(log.front().find("lab sync failed"), std::string::npos) << log.front();
}

TEST(LabSync, RunWithSyncLeavesTheWholeRunOnTheServer) {
  auto url = SharedServer().NewDatabase();
  ASSERT_TRUE(url.ok());
  testing::TempDir dir;
  const std::string proc = dir.File("p.kpp"), db = dir.File("bench.db");
  std::ofstream(proc) << lab::testing::kLabProcedure;
  ASSERT_EQ(testing::RunKneepoint({"run", proc, "--rig", "sim", "--db", db, "--sim-soc", "60%", "--bench", "bench S", "--sync", *url}), 0);
  auto c = pg::PgConn::Connect(*url);
  ASSERT_TRUE(c.ok());
  auto bench = sql::Db::Open(db, false, true);
  ASSERT_TRUE(bench.ok());
  EXPECT_EQ(PgInt(**c, "SELECT COUNT(*) FROM kneepoint.samples"), Count(**bench, "SELECT COUNT(*) FROM samples"));
  auto r = (*c)->Query("SELECT outcome, verdict, sample_count FROM kneepoint.runs");
  ASSERT_TRUE(r.ok());
  ASSERT_EQ(r->rows(), 1);
  EXPECT_EQ(r->Text(0, 0), "completed");
  EXPECT_FALSE(r->IsNull(0, 1));  // the verdict, recorded after the run ended, made it too
  EXPECT_EQ(r->Int(0, 2), Count(**bench, "SELECT COUNT(*) FROM samples"));
  // A URL that is not PostgreSQL's is refused before anything runs.
  EXPECT_NE(testing::RunKneepoint({"run", proc, "--rig", "sim", "--db", db, "--sync", "mysql://x"}), 0);
}

TEST(LabSync, AMissingServerIsAClearError) {
  Bench bench;
  bench.Run("bench N", 1);
  testing::TempDir nowhere;
  auto st = lab::SyncOnce(bench.path(), "postgresql:///postgres?host=" + nowhere.path().string() + "&port=5432&user=postgres");
  ASSERT_FALSE(st.ok());
  EXPECT_EQ(st.status().code(), StatusCode::kUnavailable);
  EXPECT_NE(st.status().message().find("cannot connect"), std::string::npos) << st.status().ToString();
}

}  // namespace
}  // namespace kp
