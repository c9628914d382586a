// The bench overview's logic: grouping the runs of a multi-channel bench or
// batch, the time-left estimate and its basis, and the tiles made from a real
// store whose runs the simulated multi-channel bench made in virtual time
// (one channel aborted by a request, the others completed).
#include "ui/panel/bench_overview.h"

#include <gtest/gtest.h>

#include <atomic>
#include <fstream>

#include "drivers/lockstep_clock.h"
#include "drivers/sim/multi_bench.h"
#include "procedures/procedure_parser.h"
#include "rig/bench_run.h"
#include "rig/channel_bench.h"
#include "rig/control_channel.h"
#include "rig/rig_file.h"
#include "tests/support/sim_channels.h"
#include "tests/support/test_support.h"

namespace kp::ui {
namespace {

using testing::TempDir;

RunListRow Row(int64_t id, std::string slot, std::string batch, std::string bench, RunState state) {
  RunListRow r;
  r.id = id;
  r.slot = std::move(slot);
  r.batch = std::move(batch);
  r.bench = std::move(bench);
  r.run_state = state;
  return r;
}

TEST(BenchOverview, NaturalOrderOfSlots) {
  EXPECT_TRUE(NaturalLess("A2", "A10"));
  EXPECT_FALSE(NaturalLess("A10", "A2"));
  EXPECT_TRUE(NaturalLess("A10", "B1"));
  EXPECT_TRUE(NaturalLess("A02", "A3"));
  EXPECT_FALSE(NaturalLess("A1", "A1"));
  EXPECT_TRUE(NaturalLess("A", "A1"));
}

TEST(BenchOverview, GroupsByBatchThenBenchNewestRunPerSlot) {
  std::vector<RunListRow> rows = {
      Row(9, "", "", "rack", RunState::kRunning),             // a one-cell run: no bench's
      Row(8, "A2", "", "rack", RunState::kCompleted),         // a bench run without a batch
      Row(7, "A1", "", "rack", RunState::kAborted),
      Row(6, "A10", "lot-4", "rack", RunState::kCompleted),
      Row(5, "A2", "lot-4", "rack", RunState::kRunning),      // resumed slot A2: the newer run counts
      Row(4, "A2", "lot-4", "rack", RunState::kInterrupted),
      Row(3, "A1", "lot-4", "rack", RunState::kCompleted),
  };
  std::vector<BenchGroup> g = GroupBenches(rows);
  ASSERT_EQ(g.size(), 2u);
  // The batch has a run going on: it comes first although the bench's runs are newer.
  EXPECT_EQ(g[0].key, "batch=lot-4");
  EXPECT_EQ(g[0].title, "batch lot-4");
  EXPECT_TRUE(g[0].live);
  EXPECT_EQ(g[0].slots, (std::vector<std::string>{"A1", "A2", "A10"}));
  EXPECT_EQ(g[0].run_ids, (std::vector<int64_t>{3, 5, 6}));
  EXPECT_EQ(g[1].key, "bench=rack");
  EXPECT_FALSE(g[1].live);
  EXPECT_EQ(g[1].run_ids, (std::vector<int64_t>{7, 8}));
  EXPECT_EQ(g[1].newest_id, 8);
  // Once nothing runs, the most recently started comes first.
  rows[4].run_state = RunState::kCompleted;
  g = GroupBenches(rows);
  EXPECT_EQ(g[0].key, "bench=rack");
  EXPECT_TRUE(GroupBenches({Row(1, "", "", "sim", RunState::kRunning)}).empty());
}

Plan Compile(const char* text) {
  auto plan = CompileProcedure(text, "overview.kpp");
  EXPECT_TRUE(plan.ok()) << plan.status().ToString();
  return plan.ok() ? *plan : Plan{};
}

StepRow Step(int index, double started_s) {
  StepRow s;
  s.index = index;
  s.started_s = started_s;
  return s;
}

TEST(BenchOverview, TimeLeftFromAPlanThatEndsOnTime) {
  Plan plan = Compile(R"(name "soak"
cell li-ion rated=2000mAh nominal=3.6V max=4.2V cutoff=3.0V
discharge 0.2C until voltage<=3.0V every=10s
rest 10min every=10s
rest 5min every=10s
)");
  // In the first rest, 150 s after it began: 450 s of it and the 300 s rest after it.
  TimeLeft t = EstimateTimeLeft(RunState::kRunning, &plan, {Step(0, 0.0), Step(1, 100.0)}, 250.0, 0.0, 2000.0, 1500.0);
  ASSERT_TRUE(t.s.has_value()) << t.basis;
  EXPECT_DOUBLE_EQ(*t.s, 450.0 + 300.0);
  EXPECT_NE(t.basis.find("plan"), std::string::npos) << t.basis;
  // A held run is still going: the same estimate.
  EXPECT_TRUE(EstimateTimeLeft(RunState::kHeld, &plan, {Step(1, 100.0)}, 250.0, 0.0, 2000.0, 0.0).s.has_value());
}

TEST(BenchOverview, TimeLeftFromTheRatingAtThePresentCurrent) {
  Plan plan = Compile(R"(name "capacity"
cell li-ion rated=2000mAh nominal=3.6V max=4.2V cutoff=3.0V
rest 1min every=10s
discharge 0.5C until voltage<=3.0V every=10s
)");
  // The discharge ends on voltage: the plan gives no time; 2000 - 500 mAh left at 1.0 A -> 1.5 h.
  TimeLeft t = EstimateTimeLeft(RunState::kRunning, &plan, {Step(0, 0.0), Step(1, 60.0)}, 1860.0, 1.0, 2000.0, 500.0);
  ASSERT_TRUE(t.s.has_value()) << t.basis;
  EXPECT_NEAR(*t.s, 1.5 * 3600.0, 1e-9);
  EXPECT_NE(t.basis.find("rated"), std::string::npos) << t.basis;
  // Past the rating: zero, never negative.
  EXPECT_DOUBLE_EQ(*EstimateTimeLeft(RunState::kRunning, &plan, {Step(1, 60.0)}, 9000.0, 1.0, 2000.0, 2100.0).s, 0.0);
  // Unreadable plan: the rating still serves.
  EXPECT_TRUE(EstimateTimeLeft(RunState::kRunning, nullptr, {}, 10.0, 1.0, 2000.0, 0.0).s.has_value());
  // Resting (no current) in a step that ends on voltage, no rating, or an ended run: no estimate, and it says why.
  TimeLeft none = EstimateTimeLeft(RunState::kRunning, &plan, {Step(1, 60.0)}, 100.0, 0.0, 2000.0, 0.0);
  EXPECT_FALSE(none.s.has_value());
  EXPECT_NE(none.basis.find("not discharging"), std::string::npos) << none.basis;
  EXPECT_FALSE(EstimateTimeLeft(RunState::kRunning, &plan, {Step(1, 60.0)}, 100.0, 1.0, 0.0, 0.0).s.has_value());
  TimeLeft ended = EstimateTimeLeft(RunState::kCompleted, &plan, {Step(1, 60.0)}, 100.0, 1.0, 2000.0, 0.0);
  EXPECT_FALSE(ended.s.has_value());
  EXPECT_NE(ended.basis.find("ended"), std::string::npos);
}

// ------------------------------------------------ tiles from a real bench run

constexpr double kCellAh = 2.56;

std::string BenchText() {
  testing::SimChannelRig r;
  r.bench_name = "overview bench";
  r.dialect = "kneepoint-sim-chlist";
  r.channels = 3;
  r.max_voltage_v = 4.3;
  return testing::SimChannelRigText(r);
}

TEST(BenchOverview, TilesOfARealBatchWithOneChannelAborted) {
  TempDir dir;
  LockstepClock clock;
  sim::SimMultiBench multi(sim::BatchCells(sim::DemoLiIonCell(kCellAh), sim::CellSpread{0.03, 0.10, 0.0}, 3, 7), clock);
  const std::string rig_path = dir.File("bench.toml");
  std::ofstream(rig_path) << BenchText();
  auto spec = LoadRigFile(rig_path);
  ASSERT_TRUE(spec.ok()) << spec.status().ToString();
  BenchOpenOptions bo;
  bo.rig.clock = &clock;
  bo.connect = ConnectToSimBench(multi, clock);
  auto bench = OpenChannelBench(*spec, bo);
  ASSERT_TRUE(bench.ok()) << bench.status().ToString();
  Plan plan = Compile(R"(name "overview batch: 1 It"
cell li-ion rated=2560mAh nominal=3.65V max=4.2V cutoff=3.0V max-temp=60degC
safety max-temp=55degC max-time=6h
rest 1min every=10s
discharge 1C until voltage<=3.0V every=10s
)");
  std::vector<ChannelJob> jobs = testing::BatchJobs(plan, 3, "OV", "OV1");
  BenchRunOptions o;
  o.db_path = dir.File("runs.db");
  o.lock_dir = dir.File("locks");
  o.wall = &clock;  // control requests are polled in run time
  SteadyClock wall;
  auto requester = Store::Open(o.db_path, wall);
  ASSERT_TRUE(requester.ok());
  std::atomic<bool> asked{false};
  o.on_sample = [&](int job, const Reading& r, double) {
    if (job == 1 && r.t_s >= 900 && !asked.exchange(true)) {
      RunFilter filter;
      filter.tag = "slot=A2";
      auto runs = (*requester)->FindRuns(filter);
      ASSERT_TRUE(runs.ok() && runs->size() == 1);
      ASSERT_OK(ControlChannel::Request(**requester, runs->front().id, ControlAction::kAbort, "tester"));
    }
  };
  auto out = RunBench(**bench, std::move(jobs), o);
  ASSERT_TRUE(out.ok()) << out.status().ToString();
  ASSERT_EQ((*out)[1].result.outcome, Outcome::kAborted);

  // What the panel reads: the runs list, then the bench's runs watched.
  RunFeed::Options fo;
  fo.db_path = o.db_path;
  RunFeed feed(fo);
  FeedState state;
  ASSERT_TRUE(feed.WaitCaughtUp(30.0));
  feed.Drain(state);
  std::vector<BenchGroup> groups = GroupBenches(state.runs);
  ASSERT_EQ(groups.size(), 1u);
  const BenchGroup& g = groups[0];
  EXPECT_EQ(g.title, "batch OV1");
  EXPECT_FALSE(g.live);
  ASSERT_EQ(g.slots, (std::vector<std::string>{"A1", "A2", "A3"}));
  feed.Watch({g.run_ids.begin(), g.run_ids.end()});
  ASSERT_TRUE(feed.WaitCaughtUp(30.0));
  while (feed.Drain(state) && state.Backlog() > 0) {
  }
  for (size_t k = 0; k < 3; ++k) {
    SCOPED_TRACE(g.slots[k]);
    ASSERT_EQ(g.run_ids[k], (*out)[k].result.run_id);
    ASSERT_TRUE(state.watched.count(g.run_ids[k]));
    const RunData& d = state.watched.at(g.run_ids[k]);
    auto parsed = ParseProcedure(d.row.procedure_text, d.row.procedure_name);
    ASSERT_TRUE(parsed.ok());
    BenchTile tile = MakeTile(g.slots[k], d, &parsed.plan);
    EXPECT_EQ(tile.run_id, g.run_ids[k]);
    EXPECT_EQ(tile.serial, "OV-" + std::to_string(k + 1));
    auto run = (*requester)->GetRun(tile.run_id);
    ASSERT_TRUE(run.ok());
    ASSERT_TRUE(run->delivered_mah.has_value());
    EXPECT_DOUBLE_EQ(tile.delivered_mah, *run->delivered_mah);
    auto samples = (*requester)->LoadSamples(tile.run_id);
    ASSERT_TRUE(samples.ok() && !samples->empty());
    ASSERT_TRUE(tile.voltage_v.has_value());
    EXPECT_DOUBLE_EQ(*tile.voltage_v, samples->back().voltage_v) << "the latest stored reading";
    EXPECT_FALSE(tile.left.s.has_value()) << "an ended run has no time left";
    EXPECT_NE(tile.left.basis.find("ended"), std::string::npos);
    if (k == 1) {
      EXPECT_EQ(tile.status.badge, "ABORTED");
      ASSERT_FALSE(tile.alarms.empty());
      bool names_requester = false;
      for (const std::string& a : tile.alarms) names_requester = names_requester || a.find("tester") != std::string::npos;
      EXPECT_TRUE(names_requester) << tile.alarms.back();
      EXPECT_GT(*tile.voltage_v, 3.1) << "stopped mid-discharge";
      EXPECT_LT(tile.delivered_mah, 0.5 * kCellAh * 1000.0);
    } else {
      EXPECT_EQ(tile.status.badge, "COMPLETED");
      EXPECT_TRUE(tile.alarms.empty()) << tile.alarms.front();
      EXPECT_LE(*tile.voltage_v, 3.0 + 0.02) << "ended at the cutoff";
      EXPECT_GT(tile.delivered_mah, 0.8 * kCellAh * 1000.0);
    }
  }
}

}  // namespace
}  // namespace kp::ui
