#include "rig/store.h"

#include <gtest/gtest.h>

#include <atomic>
#include <thread>

#include "tests/support/test_support.h"

namespace kp {
namespace {

NewRun DemoRun() { return NewRun{"cell-'quoted\"; DROP TABLE runs;--", "li-ion", 2500, "p", "text", "sim"}; }

TEST(Store, SamplesRoundTripExactly) {
  testing::TempDir dir;
  SteadyClock wall;
  auto store = Store::Open(dir.File("a.db"), wall);
  ASSERT_TRUE(store.ok()) << store.status().ToString();
  auto run = (*store)->BeginRun(DemoRun());
  ASSERT_TRUE(run.ok());
  std::vector<Sample> written;
  for (int i = 0; i < 2500; ++i) {
    Sample s{i * 0.37, 4.2 - i * 1e-4, 0.5 + (i % 7) * 1e-3, 25.0 + i * 1e-3, i / 1000};
    written.push_back(s);
    ASSERT_OK((*store)->AppendSample(*run, s));
  }
  ASSERT_OK((*store)->FinishRun(*run, Outcome::kCompleted, "done"));
  store->reset();

  auto again = Store::Open(dir.File("a.db"), wall);
  ASSERT_TRUE(again.ok());
  auto read = (*again)->LoadSamples(*run);
  ASSERT_TRUE(read.ok());
  ASSERT_EQ(read->size(), written.size());
  for (size_t i = 0; i < written.size(); ++i) {
    EXPECT_EQ((*read)[i].t_s, written[i].t_s);
    EXPECT_EQ((*read)[i].voltage_v, written[i].voltage_v);
    EXPECT_EQ((*read)[i].current_a, written[i].current_a);
    EXPECT_EQ((*read)[i].temperature_c, written[i].temperature_c);
    EXPECT_EQ((*read)[i].step, written[i].step);
  }
  auto row = (*again)->GetRun(*run);
  ASSERT_TRUE(row.ok());
  EXPECT_EQ(row->cell, DemoRun().cell_name);  // stored verbatim: parameters are bound
  EXPECT_EQ(row->outcome, Outcome::kCompleted);
  EXPECT_EQ(row->sample_count, 2500);
}

TEST(Store, SchemaVersionAndWal) {
  testing::TempDir dir;
  SteadyClock wall;
  auto store = Store::Open(dir.File("b.db"), wall);
  ASSERT_TRUE(store.ok());
  EXPECT_EQ(*(*store)->SchemaVersion(), kSchemaVersion);
  EXPECT_EQ(*(*store)->JournalMode(), "wal");
}

TEST(Store, RefusesANewerSchema) {
  testing::TempDir dir;
  SteadyClock wall;
  {
    auto store = Store::Open(dir.File("c.db"), wall);
    ASSERT_TRUE(store.ok());
    ASSERT_OK((*store)->db().Exec("PRAGMA user_version=99"));
  }
  auto store = Store::Open(dir.File("c.db"), wall);
  ASSERT_FALSE(store.ok());
  EXPECT_EQ(store.status().code(), StatusCode::kInvalidInput);
  EXPECT_NE(store.status().message().find("newer"), std::string::npos);
}

TEST(Store, EventsAndStepsAreCommittedAtOnce) {
  testing::TempDir dir;
  SteadyClock wall;
  Store::Options slow;
  slow.commit_interval_s = 3600;  // only events and steps commit
  auto writer = Store::Open(dir.File("d.db"), wall, slow);
  ASSERT_TRUE(writer.ok());
  auto run = (*writer)->BeginRun(DemoRun());
  ASSERT_TRUE(run.ok());
  ASSERT_OK((*writer)->BeginStep(*run, 0, "rest", "rest 1 h", 0.0));
  ASSERT_OK((*writer)->AppendSample(*run, {1.0, 4.1, 0.0, 25.0, 0}));
  auto reader = Store::Open(dir.File("d.db"), wall);
  ASSERT_TRUE(reader.ok());
  EXPECT_EQ((*reader)->LoadSamples(*run)->size(), 0u);  // batch still open: not visible
  ASSERT_OK((*writer)->AddEvent(*run, 1.0, "note", "hello"));
  EXPECT_EQ((*reader)->LoadSamples(*run)->size(), 1u);
  EXPECT_EQ((*reader)->LoadEvents(*run)->size(), 1u);
  EXPECT_EQ((*reader)->LoadSteps(*run)->size(), 1u);
}

TEST(Store, ACommitGroupMakesItsWritesVisibleTogetherWhenItCloses) {
  testing::TempDir dir;
  SteadyClock wall;
  Store::Options slow;
  slow.commit_interval_s = 3600;
  auto writer = Store::Open(dir.File("g.db"), wall, slow);
  ASSERT_TRUE(writer.ok());
  auto run = (*writer)->BeginRun(DemoRun());
  ASSERT_TRUE(run.ok());
  auto reader = Store::Open(dir.File("g.db"), wall);
  ASSERT_TRUE(reader.ok());
  ASSERT_OK((*writer)->AppendSample(*run, {1.0, 4.1, 0.0, 25.0, 0}));
  {
    Store::CommitGroup outer(**writer);
    ASSERT_OK((*writer)->BeginStep(*run, 0, "rest", "rest 1 h", 1.0));
    {
      Store::CommitGroup inner(**writer);
      ASSERT_OK((*writer)->AddEvent(*run, 1.0, "step", "step 1: rest 1 h"));
      ASSERT_OK(inner.Close());  // nested: nothing committed yet
    }
    EXPECT_EQ((*reader)->LoadSteps(*run)->size(), 0u);
    EXPECT_EQ((*reader)->LoadEvents(*run)->size(), 0u);
    EXPECT_EQ((*reader)->LoadSamples(*run)->size(), 0u);
    ASSERT_OK(outer.Close());
  }
  // One commit: the step, its event and the samples staged before them.
  EXPECT_EQ((*reader)->LoadSteps(*run)->size(), 1u);
  EXPECT_EQ((*reader)->LoadEvents(*run)->size(), 1u);
  EXPECT_EQ((*reader)->LoadSamples(*run)->size(), 1u);
  // A group closed by its destructor commits too.
  {
    Store::CommitGroup g(**writer);
    ASSERT_OK((*writer)->AddEvent(*run, 2.0, "note", "left by the destructor"));
  }
  EXPECT_EQ((*reader)->LoadEvents(*run)->size(), 2u);
}

// Several processes opening a new database file at the same moment (a runner
// creating it, a test or the panel polling for it): each one migrates only
// what the others have not, and every open succeeds.
TEST(Store, OpensRacingOnANewFileAllSucceed) {
  testing::TempDir dir;
  constexpr int kOpeners = 6;
  for (int round = 0; round < 15; ++round) {
    const std::string path = dir.File("race" + std::to_string(round) + ".db");
    std::atomic<int> ready{0};
    std::vector<std::string> errors(kOpeners);
    std::vector<std::thread> threads;
    for (int i = 0; i < kOpeners; ++i)
      threads.emplace_back([&, i] {
        ++ready;
        while (ready.load() < kOpeners) std::this_thread::yield();
        SteadyClock wall;
        auto store = Store::Open(path, wall);
        if (!store.ok()) errors[static_cast<size_t>(i)] = store.status().ToString();
      });
    for (std::thread& t : threads) t.join();
    for (const std::string& e : errors) EXPECT_EQ(e, "") << "round " << round;
    SteadyClock wall;
    auto store = Store::Open(path, wall);
    ASSERT_TRUE(store.ok());
    EXPECT_EQ(*(*store)->SchemaVersion(), kSchemaVersion);
  }
}

TEST(Store, OrphanedRunIsMarkedInterrupted) {
  testing::TempDir dir;
  SteadyClock wall;
  auto store = Store::Open(dir.File("e.db"), wall);
  ASSERT_TRUE(store.ok());
  auto run = (*store)->BeginRun(DemoRun());
  ASSERT_TRUE(run.ok());
  // Pretend the runner was a process that no longer exists.
  ASSERT_OK((*store)->db().Exec("UPDATE runs SET runner_pid=2147483646"));
  auto other = Store::Open(dir.File("e.db"), wall);
  ASSERT_TRUE(other.ok());
  EXPECT_EQ(*(*other)->ReconcileOrphans(), 1);
  EXPECT_EQ((*other)->GetRun(*run)->outcome, Outcome::kInterrupted);
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

TEST(Store, ControlRequestsQueueAndHandle) {
  testing::TempDir dir;
  SteadyClock wall;
  auto store = Store::Open(dir.File("r.db"), wall);
  ASSERT_TRUE(store.ok());
  auto run = (*store)->BeginRun(DemoRun());
  ASSERT_TRUE(run.ok());
  EXPECT_FALSE((*store)->AddRequest(*run, "explode", "test").ok());
  EXPECT_FALSE((*store)->AddRequest(*run + 1, "abort", "test").ok());
  auto id = (*store)->AddRequest(*run, "pause", "panel 'x'");
  ASSERT_TRUE(id.ok());
  auto pending = (*store)->PendingRequests(*run);
  ASSERT_TRUE(pending.ok());
  ASSERT_EQ(pending->size(), 1u);
  EXPECT_EQ((*pending)[0].action, "pause");
  EXPECT_EQ((*pending)[0].requested_by, "panel 'x'");
  ASSERT_OK((*store)->MarkRequestHandled(*id));
  EXPECT_TRUE((*store)->PendingRequests(*run)->empty());
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

int64_t CountedRows(Store& store, int64_t run) {
  auto q = store.db().Prepare("SELECT COUNT(*) FROM samples WHERE run_id=?1");
  EXPECT_TRUE(q.ok());
  q->Bind(1, run);
  EXPECT_TRUE(*q->Step());
  return q->Int(0);
}

TEST(StoreSampleCount, KeptWithEveryCommittedBatchAndOnlyThen) {
  testing::TempDir dir;
  SteadyClock wall;
  Store::Options slow;
  slow.commit_interval_s = 3600;  // only explicit commits and events
  auto writer = Store::Open(dir.File("n.db"), wall, slow);
  ASSERT_TRUE(writer.ok());
  auto other = Store::Open(dir.File("n.db"), wall);
  ASSERT_TRUE(other.ok());
  auto first = (*writer)->BeginRun(DemoRun());
  ASSERT_TRUE(first.ok());
  for (int i = 0; i < 7; ++i) ASSERT_OK((*writer)->AppendSample(*first, {i * 1.0, 4.1, 0.5, 25.0, 0}));
  EXPECT_EQ((*other)->GetRun(*first)->sample_count, 0);  // staged, not committed
  ASSERT_OK((*writer)->Commit());
  EXPECT_EQ((*other)->GetRun(*first)->sample_count, 7);
  for (int i = 7; i < 12; ++i) ASSERT_OK((*writer)->AppendSample(*first, {i * 1.0, 4.1, 0.5, 25.0, 0}));
  ASSERT_OK((*writer)->AddEvent(*first, 12.0, "note", "commits the batch"));
  EXPECT_EQ((*other)->GetRun(*first)->sample_count, 12);
  ASSERT_OK((*writer)->FinishRun(*first, Outcome::kCompleted, "done"));
  // A second run counts its own samples only; the listing agrees with the rows.
  auto second = (*writer)->BeginRun(DemoRun());
  ASSERT_TRUE(second.ok());
  for (int i = 0; i < 3; ++i) ASSERT_OK((*writer)->AppendSample(*second, {i * 1.0, 4.1, 0.5, 25.0, 0}));
  ASSERT_OK((*writer)->FinishRun(*second, Outcome::kAborted, "stop"));
  auto runs = (*other)->ListRuns();
  ASSERT_TRUE(runs.ok());
  ASSERT_EQ(runs->size(), 2u);
  EXPECT_EQ((*runs)[0].sample_count, 12);
  EXPECT_EQ((*runs)[1].sample_count, 3);
  for (const RunRow& r : *runs) EXPECT_EQ(r.sample_count, CountedRows(**other, r.id)) << "run " << r.id;
}

TEST(StoreSampleCount, ReopenedRunCountsFromItsRows) {
  testing::TempDir dir;
  SteadyClock wall;
  int64_t run = 0;
  {
    auto writer = Store::Open(dir.File("r.db"), wall);
    ASSERT_TRUE(writer.ok());
    auto r = (*writer)->BeginRun(DemoRun());
    ASSERT_TRUE(r.ok());
    run = *r;
    for (int i = 0; i < 10; ++i) {
      ASSERT_OK((*writer)->StageSample(run, {i * 1.0, 4.1, 0.5, 25.0, 0}));
      (*writer)->SetProgress(run, {"v1 step=0 elapsed=0 charge=0 energy=0", i * 1.0, 0, 0});
    }
    ASSERT_OK((*writer)->Commit());
  }
  // As if the runner died, and the count had been lost (a database written by hand).
  {
    auto db = sql::Db::Open(dir.File("r.db"), false);
    ASSERT_TRUE(db.ok());
    ASSERT_OK((*db)->Exec("UPDATE runs SET outcome='interrupted', sample_count=0"));
  }
  auto store = Store::Open(dir.File("r.db"), wall);
  ASSERT_TRUE(store.ok());
  auto reopened = (*store)->ReopenRun(run);
  ASSERT_TRUE(reopened.ok()) << reopened.status().ToString();
  EXPECT_EQ(reopened->next_seq, 10);
  EXPECT_EQ((*store)->GetRun(run)->sample_count, 10);
  for (int i = 10; i < 15; ++i) ASSERT_OK((*store)->AppendSample(run, {i * 1.0, 4.1, 0.5, 25.0, 0}));
  ASSERT_OK((*store)->FinishRun(run, Outcome::kCompleted, "done"));
  EXPECT_EQ((*store)->GetRun(run)->sample_count, 15);
  EXPECT_EQ(CountedRows(**store, run), 15);
}

TEST(StoreProgress, SnapshotIsProducedOnlyByTheCommitThatWritesIt) {
  testing::TempDir dir;
  SteadyClock wall;
  Store::Options slow;
  slow.commit_interval_s = 3600;
  auto store = Store::Open(dir.File("p.db"), wall, slow);
  ASSERT_TRUE(store.ok());
  auto run = (*store)->BeginRun(DemoRun());
  ASSERT_TRUE(run.ok());
  int produced = 0;
  for (int i = 0; i < 100; ++i) {
    ASSERT_OK((*store)->StageSample(*run, {i * 1.0, 4.1, 0.5, 25.0, 0}));
    (*store)->SetProgress(*run, ProgressFigures{i * 1.0, i * 0.1, i * 0.01}, [&produced, i] {
      ++produced;
      return "snapshot after sample " + std::to_string(i);
    });
    ASSERT_OK((*store)->MaybeCommit());
  }
  EXPECT_EQ(produced, 0);  // nothing committed yet: nothing formatted
  ASSERT_OK((*store)->Commit());
  EXPECT_EQ(produced, 1);  // only the latest producer, once
  auto p = (*store)->LoadProgress(*run);
  ASSERT_TRUE(p.ok() && p->has_value());
  EXPECT_EQ((*p)->engine_snapshot, "snapshot after sample 99");
  EXPECT_DOUBLE_EQ((*p)->t_s, 99.0);
  EXPECT_DOUBLE_EQ((*p)->delivered_mah, 9.9);
  // A commit with no new progress leaves the stored snapshot as it was.
  ASSERT_OK((*store)->AddEvent(*run, 99.0, "note", "x"));
  EXPECT_EQ(produced, 1);
  EXPECT_EQ((*(*store)->LoadProgress(*run))->engine_snapshot, "snapshot after sample 99");
  // An eager snapshot replaces a pending producer.
  (*store)->SetProgress(*run, ProgressFigures{100.0, 10.0, 1.0}, [&produced] {
    ++produced;
    return std::string("lazy");
  });
  (*store)->SetProgress(*run, RunProgress{"eager", 100.0, 10.0, 1.0});
  ASSERT_OK((*store)->Commit());
  ASSERT_OK((*store)->AddEvent(*run, 100.0, "note", "y"));
  EXPECT_EQ(produced, 1);
  EXPECT_EQ((*(*store)->LoadProgress(*run))->engine_snapshot, "eager");
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

// Merged block summaries of a run against one summary over all its samples.
void ExpectBlocksMatchSamples(Store& store, int64_t run) {
  auto samples = store.LoadSamples(run);
  ASSERT_TRUE(samples.ok());
  SampleSummary direct;
  for (const Sample& s : *samples) direct.Add(s);
  auto blocks = store.LoadBlocks(run, 0, 1 << 30);
  ASSERT_TRUE(blocks.ok());
  SampleSummary merged;
  int64_t expect_index = 0;
  for (const SampleBlock& b : *blocks) {
    EXPECT_EQ(b.index, expect_index++);
    merged.Merge(b.summary);
  }
  EXPECT_EQ(merged.count, direct.count);
  EXPECT_EQ(merged.last.t_s, direct.last.t_s);
  EXPECT_EQ(merged.first.t_s, direct.first.t_s);
  EXPECT_NEAR(merged.net_mah, direct.net_mah, 1e-9 * std::max(1.0, std::abs(direct.net_mah)));
  EXPECT_NEAR(merged.discharged_mah, direct.discharged_mah, 1e-9 * std::max(1.0, direct.discharged_mah));
  EXPECT_NEAR(merged.charged_mah, direct.charged_mah, 1e-9 * std::max(1.0, direct.charged_mah));
  EXPECT_NEAR(merged.since_charge_mah, direct.since_charge_mah, 1e-9 * std::max(1.0, direct.since_charge_mah));
  EXPECT_NEAR(merged.discharged_wh, direct.discharged_wh, 1e-9 * std::max(1.0, direct.discharged_wh));
  EXPECT_NEAR(merged.voltage_time_vs, direct.voltage_time_vs, 1e-9 * std::max(1.0, direct.voltage_time_vs));
  EXPECT_EQ(merged.min_voltage_v, direct.min_voltage_v);
  EXPECT_EQ(merged.max_voltage_v, direct.max_voltage_v);
  EXPECT_EQ(merged.min_current_a, direct.min_current_a);
  EXPECT_EQ(merged.max_temperature_c, direct.max_temperature_c);
}

// A discharge, a charge, a rest and a discharge with a spike: every figure moves.
Sample Cycling(int i) {
  double current_a = i < 100 ? 1.0 : i < 300 ? -0.8 : i < 350 ? 0.0 : 1.2;
  double spike = i == 777 ? 0.4 : 0.0;
  return Sample{i * 0.5, 3.6 + 0.001 * (i % 50) - spike, current_a + 0.01 * (i % 3), 25.0 + 0.02 * (i % 11), i < 300 ? 0 : 1};
}

TEST(StoreBlocks, SummariesKeptWithTheBatchesMergeToTheSamples) {
  testing::TempDir dir;
  SteadyClock wall;
  Store::Options slow;
  slow.commit_interval_s = 3600;
  auto store = Store::Open(dir.File("b.db"), wall, slow);
  ASSERT_TRUE(store.ok());
  auto run = (*store)->BeginRun(DemoRun());
  ASSERT_TRUE(run.ok());
  for (int i = 0; i < 1000; ++i) {
    ASSERT_OK((*store)->AppendSample(*run, Cycling(i)));
    if (i % 97 == 0) ASSERT_OK((*store)->Commit());  // commits inside blocks and across their ends
  }
  ASSERT_OK((*store)->Commit());
  auto blocks = (*store)->LoadBlocks(*run, 0, 1000);
  ASSERT_TRUE(blocks.ok());
  ASSERT_EQ(blocks->size(), static_cast<size_t>((1000 + kSamplesPerBlock - 1) / kSamplesPerBlock));
  EXPECT_EQ(blocks->front().summary.count, kSamplesPerBlock);
  EXPECT_EQ(blocks->back().summary.count, 1000 % kSamplesPerBlock);
  ExpectBlocksMatchSamples(**store, *run);
  // Only the tail is read when asked from a later block.
  auto tail = (*store)->LoadBlocks(*run, 7, 1000);
  ASSERT_TRUE(tail.ok());
  ASSERT_EQ(tail->size(), 1u);
  EXPECT_EQ((*tail)[0].index, 7);
  auto window = (*store)->LoadSampleRange(*run, 130, 140);
  ASSERT_TRUE(window.ok());
  ASSERT_EQ(window->size(), 10u);
  EXPECT_EQ((*window)[0].t_s, Cycling(130).t_s);
  EXPECT_EQ((*window)[9].t_s, Cycling(139).t_s);
}

TEST(StoreBlocks, ResumedRunContinuesItsLastBlock) {
  testing::TempDir dir;
  SteadyClock wall;
  int64_t run = 0;
  {
    auto writer = Store::Open(dir.File("r.db"), wall);
    ASSERT_TRUE(writer.ok());
    auto r = (*writer)->BeginRun(DemoRun());
    ASSERT_TRUE(r.ok());
    run = *r;
    for (int i = 0; i < 200; ++i) {
      ASSERT_OK((*writer)->StageSample(run, Cycling(i)));
      (*writer)->SetProgress(run, {"v1 step=0 elapsed=0 charge=0 energy=0", i * 0.5, 0, 0});
    }
    ASSERT_OK((*writer)->Commit());
  }
  {
    auto db = sql::Db::Open(dir.File("r.db"), false);
    ASSERT_TRUE(db.ok());
    ASSERT_OK((*db)->Exec("UPDATE runs SET outcome='interrupted'"));
  }
  auto store = Store::Open(dir.File("r.db"), wall);
  ASSERT_TRUE(store.ok());
  ASSERT_TRUE((*store)->ReopenRun(run).ok());
  for (int i = 200; i < 900; ++i) ASSERT_OK((*store)->AppendSample(run, Cycling(i)));
  ASSERT_OK((*store)->FinishRun(run, Outcome::kCompleted, "done"));
  ExpectBlocksMatchSamples(**store, run);
  EXPECT_EQ((*store)->LoadBlocks(run, 1, 1)->at(0).summary.count, kSamplesPerBlock);  // block 1 spans the resume
}

TEST(StoreBlocks, MigrationBackfillsBlocksOfStoredRuns) {
  testing::TempDir dir;
  SteadyClock wall;
  {
    auto store = Store::Open(dir.File("m.db"), wall);
    ASSERT_TRUE(store.ok());
    auto run = (*store)->BeginRun(DemoRun());
    ASSERT_TRUE(run.ok());
    for (int i = 0; i < 700; ++i) ASSERT_OK((*store)->AppendSample(*run, Cycling(i)));
    ASSERT_OK((*store)->FinishRun(*run, Outcome::kCompleted, "done"));
    // Back to a version 3 database: none of v5, no count column values, no blocks.
    ASSERT_OK((*store)->db().Exec(
        "DROP VIEW run_summary; DROP VIEW step_summary; DROP VIEW cycle_summary; DROP TABLE run_tags; DROP TABLE instruments;"
        "DROP INDEX runs_by_uuid; DROP INDEX runs_by_started; ALTER TABLE runs DROP COLUMN heartbeat_utc;"
        "ALTER TABLE runs DROP COLUMN uuid; ALTER TABLE runs DROP COLUMN bench; ALTER TABLE runs DROP COLUMN host;"
        "ALTER TABLE runs DROP COLUMN operator; ALTER TABLE runs DROP COLUMN cell_serial; ALTER TABLE runs DROP COLUMN cell_lot;"
        "ALTER TABLE runs DROP COLUMN cell_part; ALTER TABLE runs DROP COLUMN rig_text; ALTER TABLE runs DROP COLUMN software_version;"
        "ALTER TABLE runs DROP COLUMN software_commit; ALTER TABLE runs DROP COLUMN verdict; ALTER TABLE runs DROP COLUMN verdict_text;"
        "ALTER TABLE runs DROP COLUMN verdict_pct_of_rated; PRAGMA application_id=0;"));
    ASSERT_OK((*store)->db().Exec("DROP TABLE sample_blocks; ALTER TABLE runs DROP COLUMN sample_count; PRAGMA user_version=3;"));
  }
  auto store = Store::Open(dir.File("m.db"), wall);
  ASSERT_TRUE(store.ok()) << store.status().ToString();
  EXPECT_EQ(*(*store)->SchemaVersion(), kSchemaVersion);
  EXPECT_EQ((*store)->GetRun(1)->sample_count, 700);
  EXPECT_EQ((*store)->LoadBlocks(1, 0, 100)->size(), static_cast<size_t>((700 + kSamplesPerBlock - 1) / kSamplesPerBlock));
  ExpectBlocksMatchSamples(**store, 1);
}

TEST(SampleSummaryMerge, SplitAnywhereEqualsOnePass) {
  std::vector<Sample> all;
  for (int i = 0; i < 500; ++i) all.push_back(Cycling(i));
  SampleSummary one;
  for (const Sample& s : all) one.Add(s);
  for (size_t cut : {size_t{1}, size_t{299}, size_t{300}, size_t{301}, size_t{349}, size_t{499}}) {
    SampleSummary a, b;
    for (size_t i = 0; i < all.size(); ++i) (i < cut ? a : b).Add(all[i]);
    a.Merge(b);
    EXPECT_EQ(a.count, one.count) << cut;
    EXPECT_NEAR(a.net_mah, one.net_mah, 1e-9) << cut;
    EXPECT_NEAR(a.charged_mah, one.charged_mah, 1e-9) << cut;
    EXPECT_NEAR(a.since_charge_mah, one.since_charge_mah, 1e-9) << cut;
    EXPECT_EQ(a.has_charge, one.has_charge) << cut;
    EXPECT_NEAR(a.net_wh, one.net_wh, 1e-9) << cut;
    EXPECT_EQ(a.min_voltage_v, one.min_voltage_v) << cut;
  }
  EXPECT_GT(one.charged_mah, 0.0);
  EXPECT_GT(one.since_charge_mah, 0.0);
  EXPECT_LT(one.since_charge_mah, one.discharged_mah);
}

}  // namespace
}  // namespace kp
