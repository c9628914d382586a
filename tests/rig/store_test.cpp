#include "rig/store.h"

#include <gtest/gtest.h>

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
