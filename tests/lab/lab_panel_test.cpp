// The panel's reader on the lab database: it shows what the benches synced
// (the same samples as the bench's own file), takes a fresh copy to show what
// was synced since, and refuses requests and notes, which belong to the bench.
#include <gtest/gtest.h>

#include <chrono>
#include <thread>

#include "rig/lab/lab_sync.h"
#include "rig/store_open.h"
#include "tests/lab/lab_test_support.h"
#include "tests/support/fixtures.h"
#include "ui/panel/run_feed.h"

namespace kp {
namespace {

using lab::testing::Bench;
using lab::testing::SharedServer;

TEST(LabPanel, FeedShowsTheSyncedRunAndRefusesRequests) {
  Bench bench;
  bench.Run("bench P", 1);
  auto url = SharedServer().NewDatabase();
  ASSERT_TRUE(url.ok()) << url.status().ToString();
  testing::CliResult s = testing::RunKneepointCaptured({"sync", "--db", bench.path(), "--to", *url});
  ASSERT_EQ(s.code, 0) << s.err;

  // What the bench's own file holds for its run.
  SteadyClock wall;
  auto original = OpenDbForReading(bench.path(), wall);
  ASSERT_TRUE(original.ok()) << original.status().ToString();
  auto runs = (*original)->ListRuns();
  ASSERT_TRUE(runs.ok());
  ASSERT_EQ(runs->size(), 1u);
  const int64_t bench_samples = (*runs)[0].sample_count;
  ASSERT_GT(bench_samples, 100);

  ui::RunFeed::Options o;
  o.db_path = *url;
  o.lab_refresh_s = 0.2;
  ui::RunFeed feed(o);
  feed.Watch({1});  // the lab copy numbers runs by start: the only run is 1
  ASSERT_TRUE(feed.WaitCaughtUp(60.0));
  ui::FeedState state;
  feed.Drain(state);
  ASSERT_EQ(state.runs.size(), 1u);
  ASSERT_EQ(state.watched.count(1), 1u);
  EXPECT_EQ(static_cast<int64_t>(state.watched[1].SampleCount()), bench_samples);

  // A request and a note are refused with a message, not written anywhere.
  feed.Request(1, "abort");
  feed.AddNote(1, "from the lab");
  bool refused = false;
  for (int i = 0; i < 200 && !refused; ++i) {
    ASSERT_TRUE(feed.WaitCaughtUp(30.0));
    feed.Drain(state);
    for (const std::string& n : state.notes) refused = refused || n.find("lab database is read only") != std::string::npos;
    if (!refused) std::this_thread::sleep_for(std::chrono::milliseconds(20));
  }
  EXPECT_TRUE(refused);

  // A second run synced later shows up after the next fresh copy.
  bench.Run("bench P", 1);
  s = testing::RunKneepointCaptured({"sync", "--db", bench.path(), "--to", *url});
  ASSERT_EQ(s.code, 0) << s.err;
  bool seen = false;
  for (int i = 0; i < 300 && !seen; ++i) {
    feed.Drain(state);
    seen = state.runs.size() == 2u;
    if (!seen) std::this_thread::sleep_for(std::chrono::milliseconds(20));
  }
  EXPECT_TRUE(seen) << "runs listed: " << state.runs.size();
}

}  // namespace
}  // namespace kp
