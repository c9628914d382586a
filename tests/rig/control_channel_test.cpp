// The control channel's polling: the database is asked at most once per poll
// interval of the injected wall clock, and a request is still acted on within
// half a second of wall time.
#include "rig/control_channel.h"

#include <gtest/gtest.h>

#include <atomic>
#include <thread>

#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

using testing::Cell2500;

TEST(ControlPolling, AsksTheDatabaseAtMostOncePerInterval) {
  testing::StoreFixture f;
  auto run = f.store->BeginRun({"cell", "li-ion", 2500, "p", "text", "sim"});
  ASSERT_TRUE(run.ok());
  VirtualClock wall;
  ControlChannel channel(*f.store, wall, 0.25);
  auto first = channel.Poll(*run);  // the first poll always asks
  ASSERT_TRUE(first.ok());
  EXPECT_TRUE(first->empty());
  EXPECT_EQ(channel.queries(), 1);
  ASSERT_OK(ControlChannel::Request(*f.store, *run, ControlAction::kPause, "tester@bench"));
  wall.Advance(Seconds(0.2));
  auto early = channel.Poll(*run);
  ASSERT_TRUE(early.ok());
  EXPECT_TRUE(early->empty());  // inside the interval: not asked yet
  EXPECT_EQ(channel.queries(), 1);
  wall.Advance(Seconds(0.05));
  auto due = channel.Poll(*run);
  ASSERT_TRUE(due.ok());
  ASSERT_EQ(due->size(), 1u);
  EXPECT_EQ((*due)[0].action, ControlAction::kPause);
  EXPECT_EQ((*due)[0].requested_by, "tester@bench");
  EXPECT_EQ(channel.queries(), 2);
  wall.Advance(Seconds(0.3));
  auto handled = channel.Poll(*run);
  ASSERT_TRUE(handled.ok());
  EXPECT_TRUE(handled->empty());  // marked handled by the poll that returned it
  EXPECT_EQ(channel.queries(), 3);
}

// A virtual-time run whose loop takes 10 ms of (virtual) wall time per
// sample: the channel asks about every 25 samples, not every sample, and an
// abort is acted on within 0.5 s of wall time.
TEST(ControlPolling, RunPicksUpARequestWithinHalfAWallSecond) {
  testing::StoreFixture f;
  SimRig rig(f.clock, sim::DemoLiIonCell(2.56));
  VirtualClock wall;
  ControlChannel channel(*f.store, wall);
  RunController rc(*f.store, f.clock, rig.roles());
  RunOptions o;
  o.control = &channel;
  int readings = 0;
  double asked_wall_s = -1.0;
  int asked_at_reading = -1;
  o.on_sample = [&](const Reading&, double) {
    ++readings;
    wall.Advance(Seconds(0.01));
    if (readings == 1234) {
      asked_wall_s = wall.Now().count();
      asked_at_reading = readings;
      ASSERT_OK(ControlChannel::Request(*f.store, f.store->ListRuns()->back().id, ControlAction::kAbort, "alice@lab"));
    }
  };
  Plan plan = RatedCapacityPlan(Cell2500());
  plan.steps[0].end.time_s = 3000;
  auto r = rc.Execute(plan, o);
  ASSERT_TRUE(r.ok());
  ASSERT_GT(asked_at_reading, 0);
  EXPECT_EQ(r->outcome, Outcome::kAborted);
  EXPECT_EQ(r->reason, "aborted by alice@lab");
  EXPECT_FALSE(rig.bench().load_input_on());
  const double acted_after_s = wall.Now().count() - asked_wall_s;
  EXPECT_LE(acted_after_s, 0.5);
  EXPECT_LT(channel.queries(), readings / 10);  // about one query per 25 readings
  EXPECT_GE(channel.queries(), readings / 30);
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

// Under fast virtual-time writing a second connection's requests used to
// fail after the busy timeout with "database is locked": the runner held its
// batch open for a whole commit interval. Now the write lock is held only
// while a commit runs, so pause, continue and abort from another connection
// are queued and taken, each with the time it was taken.
TEST(ControlUnderLoad, RequestsFromASecondConnectionAreTakenWhileTheRunnerWritesFlatOut) {
  testing::StoreFixture f;
  SimRig rig(f.clock, sim::DemoLiIonCell(2.56));
  RunController rc(*f.store, f.clock, rig.roles());
  ControlChannel channel(*f.store, f.wall, 0.05);
  std::atomic<int64_t> run_id{0};
  RunOptions o;
  o.control = &channel;
  o.on_sample = [&](const Reading&, double) { run_id = 1; };
  // 200 h at one stored sample per second if nothing stopped it.
  Plan plan = testing::CompileForCell2500("rest 200h every=1s\n");
  Result<RunResult> result = InternalError("not run");
  std::thread runner([&] { result = rc.Execute(plan, o); });
  while (run_id.load() == 0) std::this_thread::sleep_for(std::chrono::milliseconds(1));

  SteadyClock wall;
  auto other = Store::Open(f.dir.File("run.db"), wall);
  ASSERT_TRUE(other.ok()) << other.status().ToString();
  std::vector<std::string> taken;
  for (ControlAction a : {ControlAction::kPause, ControlAction::kContinue, ControlAction::kAbort}) {
    Result<int64_t> id = ControlChannel::RequestPatiently(**other, wall, 1, a, "second-writer", 30.0);
    ASSERT_TRUE(id.ok()) << id.status().ToString();
    auto at = ControlChannel::WaitTaken(**other, wall, 1, *id, 30.0);
    ASSERT_TRUE(at.ok()) << at.status().ToString();
    ASSERT_TRUE(at->has_value()) << ControlActionName(a) << " not taken";
    taken.push_back(**at);
  }
  runner.join();
  ASSERT_TRUE(result.ok()) << result.status().ToString();
  EXPECT_EQ(result->outcome, Outcome::kAborted);
  EXPECT_EQ(result->reason, "aborted by second-writer");
  EXPECT_EQ(taken.size(), 3u);
  EXPECT_FALSE(rig.bench().load_input_on());
}

}  // namespace
}  // namespace kp
