#include "ui/run_feed.h"

#include <gtest/gtest.h>

#include "analysis/metrics.h"
#include "drivers/clock.h"
#include "tests/support/test_support.h"

namespace kp::ui {
namespace {

NewRun LiveRun() {
  NewRun r;
  r.cell_name = "feed-cell-7";
  r.chemistry = "li-ion";
  r.rated_mah = 1000.0;
  r.procedure_name = "feed-check";
  r.procedure_text = "cell li-ion rated 1000 mAh cutoff 3.000 V max-temp 55 degC\n";
  r.rig = "sim";
  return r;
}

Sample At(int k) { return {k * 1.0, 4.0 - 0.0002 * k, 1.0, 25.0, 0}; }

// The reader thread follows a run that is still being written: what the
// panel holds after each drain equals the samples committed so far, and the
// running figures equal a batch recomputation over them.
TEST(RunFeed, FollowsALiveRunIncrementally) {
  testing::TempDir dir;
  VirtualClock clock;
  auto store = Store::Open(dir.File("feed.db"), clock);
  ASSERT_OK(store.status());
  auto run = (*store)->BeginRun(LiveRun());
  ASSERT_OK(run.status());
  std::vector<Sample> written;
  for (int k = 0; k < 3000; ++k) {
    written.push_back(At(k));
    ASSERT_OK((*store)->AppendSample(*run, written.back()));
  }
  ASSERT_OK((*store)->Commit());

  RunFeed::Options o;
  o.db_path = dir.File("feed.db");
  o.max_rows_per_poll = 700;  // several polls per batch: exercises the cursor
  RunFeed feed(o);
  feed.Watch({*run});
  ASSERT_TRUE(feed.WaitCaughtUp(30.0));
  FeedState state;
  feed.Drain(state);
  ASSERT_EQ(state.runs.size(), 1u);
  EXPECT_EQ(state.runs[0].state, "running");
  ASSERT_EQ(state.watched.count(*run), 1u);
  EXPECT_EQ(state.watched[*run].samples.size(), 3000u);
  ASSERT_TRUE(state.watched[*run].limits.cutoff_v);
  EXPECT_DOUBLE_EQ(*state.watched[*run].limits.cutoff_v, 3.0);

  for (int k = 3000; k < 5000; ++k) {
    written.push_back(At(k));
    ASSERT_OK((*store)->AppendSample(*run, written.back()));
  }
  ASSERT_OK((*store)->AddEvent(*run, 4999.0, "fault", "meter stopped answering"));
  ASSERT_TRUE(feed.WaitCaughtUp(30.0));
  feed.Drain(state);
  const RunData& d = state.watched[*run];
  ASSERT_EQ(d.samples.size(), written.size());
  for (size_t i = 0; i < written.size(); i += 997) EXPECT_DOUBLE_EQ(d.samples[i].t_s, written[i].t_s);
  RunFigures batch = ComputeRunFigures(written);
  EXPECT_NEAR(d.figures.charge_mah(), batch.charge_mah, 1e-9);
  EXPECT_NEAR(state.runs[0].delivered_mah, batch.charge_mah, 1e-9);
  EXPECT_EQ(d.voltage.size(), written.size());
  ASSERT_EQ(d.events.size(), 1u);
  EXPECT_EQ(EventSeverity(d.events[0]), Severity::kAlarm);
}

// A long run is taken in over several frames: each Drain appends at most the
// per-frame budget, and the rest arrives intact on later frames.
TEST(RunFeed, BoundsTheWorkPerFrame) {
  testing::TempDir dir;
  VirtualClock clock;
  auto store = Store::Open(dir.File("long.db"), clock);
  ASSERT_OK(store.status());
  auto run = (*store)->BeginRun(LiveRun());
  ASSERT_OK(run.status());
  for (int k = 0; k < 2500; ++k) ASSERT_OK((*store)->AppendSample(*run, At(k)));
  ASSERT_OK((*store)->Commit());
  RunFeed::Options o;
  o.db_path = dir.File("long.db");
  o.max_append_per_frame = 1000;
  RunFeed feed(o);
  feed.Watch({*run});
  ASSERT_TRUE(feed.WaitCaughtUp(30.0));
  FeedState state;
  feed.Drain(state);
  EXPECT_EQ(state.watched[*run].samples.size(), 1000u);
  EXPECT_EQ(state.Backlog(), 1500u);
  feed.Drain(state);
  feed.Drain(state);
  const RunData& d = state.watched[*run];
  ASSERT_EQ(d.samples.size(), 2500u);
  EXPECT_EQ(state.Backlog(), 0u);
  for (int k = 0; k < 2500; k += 499) EXPECT_DOUBLE_EQ(d.samples[static_cast<size_t>(k)].voltage_v, At(k).voltage_v);
}

// Requests from the panel land in the database for the runner to act on.
TEST(RunFeed, RequestsGoThroughTheStore) {
  testing::TempDir dir;
  VirtualClock clock;
  auto store = Store::Open(dir.File("req.db"), clock);
  ASSERT_OK(store.status());
  auto run = (*store)->BeginRun(LiveRun());
  ASSERT_OK(run.status());
  ASSERT_OK((*store)->Commit());
  {
    RunFeed::Options o;
    o.db_path = dir.File("req.db");
    RunFeed feed(o);
    feed.Watch({*run});
    feed.Request(*run, "pause");
    feed.Request(*run, "abort");
    ASSERT_TRUE(feed.WaitCaughtUp(30.0));
    FeedState state;
    feed.Drain(state);
    ASSERT_FALSE(state.notes.empty());
    EXPECT_NE(state.notes.back().find("abort requested for run"), std::string::npos);
    // The panel shows them as waiting until the runner handles them.
    ASSERT_EQ(state.watched[*run].requests.size(), 2u);
    ASSERT_OK((*store)->MarkRequestHandled(state.watched[*run].requests[0].id));
    ASSERT_TRUE(feed.WaitCaughtUp(30.0));
    feed.Drain(state);
    ASSERT_EQ(state.watched[*run].requests.size(), 1u);
    EXPECT_EQ(state.watched[*run].requests[0].action, "abort");
  }
  auto pending = (*store)->PendingRequests(*run);
  ASSERT_OK(pending.status());
  ASSERT_EQ(pending->size(), 1u);
  EXPECT_EQ((*pending)[0].action, "abort");
  EXPECT_EQ((*pending)[0].requested_by, "panel");
}

TEST(RunFeed, MissingDatabaseIsReportedNotCreated) {
  testing::TempDir dir;
  RunFeed::Options o;
  o.db_path = dir.File("absent.db");
  o.poll_s = 0.01;
  RunFeed feed(o);
  EXPECT_FALSE(feed.WaitCaughtUp(0.5));
  FeedState state;
  feed.Drain(state);
  EXPECT_FALSE(state.connected);
  ASSERT_FALSE(state.notes.empty());
  EXPECT_NE(state.notes[0].find("absent.db"), std::string::npos);
  EXPECT_FALSE(std::filesystem::exists(o.db_path));
}

}  // namespace
}  // namespace kp::ui
