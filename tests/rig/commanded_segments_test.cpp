#include "rig/commanded_segments.h"

#include <gtest/gtest.h>

#include "procedures/procedure_parser.h"
#include "rig/sim_rig.h"
#include "tests/support/test_support.h"
#include "ui/report/run_report.h"

namespace kp {
namespace {

const char* kPulses =
    "name \"pulses\"\n"
    "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n"
    "pulse 2A/7s 300mA/13s until time>=100s every=1s\n";

TEST(CommandedSegments, FollowThePulseTimelineClippedToTheStepEnd) {
  auto plan = CompileProcedure(kPulses, "pulses.kpp");
  ASSERT_TRUE(plan.ok()) << plan.status().ToString();
  StepRow row;
  row.index = 0;
  row.kind = "pulse train";
  row.started_s = 10.0;
  row.ended_s = 60.0;  // two 20 s cycles, then 7 s high and 3 s of the low level
  auto segs = CommandedSegmentsFor(*plan, {row}, {});
  ASSERT_EQ(segs.size(), 6u);
  EXPECT_DOUBLE_EQ(segs[0].t_start_s, 10.0);
  EXPECT_DOUBLE_EQ(segs[0].t_end_s, 17.0);
  EXPECT_DOUBLE_EQ(segs[0].current_a, 2.0);
  EXPECT_DOUBLE_EQ(segs[1].t_end_s, 30.0);
  EXPECT_DOUBLE_EQ(segs[1].current_a, 0.3);
  EXPECT_DOUBLE_EQ(segs[4].t_start_s, 50.0);
  EXPECT_DOUBLE_EQ(segs[4].t_end_s, 57.0);
  EXPECT_DOUBLE_EQ(segs[5].t_end_s, 60.0);  // clipped at the step's end
  EXPECT_DOUBLE_EQ(segs[5].current_a, 0.3);
  // A held step is left to the sample trapezoid.
  EventRow pause{30.0, "control", "paused by tester", ""};
  EXPECT_TRUE(CommandedSegmentsFor(*plan, {row}, {pause}).empty());
}

// On the simulator, the report's delivered charge for the pulse train equals
// the commanded timeline's charge: Q = Σ I·t (common practice, no source).
TEST(CommandedSegments, ReportChargeMatchesTheCommandedTimeline) {
  testing::TempDir dir;
  SteadyClock wall;
  VirtualClock clock;
  auto store = Store::Open(dir.File("p.db"), wall);
  ASSERT_TRUE(store.ok());
  auto plan = CompileProcedure(kPulses, "pulses.kpp");
  ASSERT_TRUE(plan.ok());
  SimRig rig(clock, sim::DemoLiIonCell(2.56));
  RunController rc(**store, clock, rig.roles());
  auto r = rc.Execute(*plan, {});
  ASSERT_TRUE(r.ok());
  ASSERT_EQ(r->outcome, Outcome::kCompleted) << r->reason;
  auto rep = BuildRunReport(**store, r->run_id);
  ASSERT_TRUE(rep.ok()) << rep.status().ToString();
  auto steps = (*store)->LoadSteps(r->run_id);
  auto segs = CommandedSegmentsFor(*plan, *steps, *(*store)->LoadEvents(r->run_id));
  ASSERT_FALSE(segs.empty());
  double commanded_mah = 0;
  for (const auto& s : segs) commanded_mah += s.current_a * (s.t_end_s - s.t_start_s) / 3.6;
  EXPECT_NEAR(rep->analysis.discharge_charge_mah, commanded_mah, 0.01 * commanded_mah);
}

}  // namespace
}  // namespace kp
