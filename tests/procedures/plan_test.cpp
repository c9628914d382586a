#include "procedures/plan.h"

#include <gtest/gtest.h>

#include "procedures/engine.h"
#include "procedures/procedure_parser.h"
#include "tests/support/fixtures.h"

namespace kp {
namespace {

using testing::Cell2500;

// IEC 61960-3 clause 7.3.1: discharge at 0.2 It, where It (A) = Cn (Ah) / 1 h,
// down to the manufacturer's end-of-discharge voltage (secondary source).
TEST(RatedCapacityPlan, FollowsIec61960Clause731) {
  Plan p = RatedCapacityPlan(Cell2500());
  ASSERT_EQ(p.steps.size(), 1u);
  EXPECT_EQ(p.steps[0].kind, StepKind::kConstantCurrent);
  EXPECT_DOUBLE_EQ(p.steps[0].current_a, 0.2 * 2.5);  // 0.2 It = 500 mA
  ASSERT_TRUE(p.steps[0].end.voltage_below_v.has_value());
  EXPECT_DOUBLE_EQ(*p.steps[0].end.voltage_below_v, 2.75);
  EXPECT_LE(p.limits.max_temp_c, 60.0);
  EXPECT_FALSE(p.source_text.empty());
}

TEST(CellSpec, CRate) {
  CellSpec c = Cell2500();
  EXPECT_DOUBLE_EQ(c.CRateToAmps(1.0), 2.5);
  EXPECT_DOUBLE_EQ(c.CRateToAmps(0.2), 0.5);
}

TEST(StepEngine, EndsOnCutoffAndSwitchesOff) {
  Plan p = RatedCapacityPlan(Cell2500());
  StepEngine e(p);
  EngineOutput out = e.Start(0);
  ASSERT_TRUE(out.setpoint.has_value());
  EXPECT_TRUE(out.setpoint->load_on);
  EXPECT_DOUBLE_EQ(out.setpoint->level, 0.5);
  // A reading follows the load edge after Plan::edge_settle_s, then one per period.
  EXPECT_DOUBLE_EQ(e.NextWakeup(), p.edge_settle_s);
  out = e.OnReading({p.edge_settle_s, 3.9, 0.5, 25});
  EXPECT_FALSE(out.finished);
  EXPECT_DOUBLE_EQ(e.NextWakeup(), p.edge_settle_s + 1.0);
  out = e.OnReading({p.edge_settle_s + 1.0, 3.9, 0.5, 25});
  EXPECT_FALSE(out.finished);
  EXPECT_TRUE(out.log);  // a regular reading of the period
  EXPECT_DOUBLE_EQ(e.NextWakeup(), p.edge_settle_s + 2.0);
  out = e.OnReading({p.edge_settle_s + 2.0, 2.749, 0.5, 25});
  EXPECT_TRUE(out.finished);
  ASSERT_TRUE(out.setpoint.has_value());
  EXPECT_FALSE(out.setpoint->load_on);
  ASSERT_EQ(out.changes.size(), 1u);
  EXPECT_NE(out.changes[0].reason.find("2.749 V <= 2.750 V"), std::string::npos) << out.changes[0].reason;
  EXPECT_NEAR(e.step_charge_mah(), 0.0, 1e-12);  // reset for the (absent) next step
}

TEST(StepEngine, TimeAndChargeEndConditions) {
  Plan p;
  p.cell = Cell2500();
  Step rest;
  rest.kind = StepKind::kRest;
  rest.end.time_s = 10;
  Step cc;
  cc.kind = StepKind::kConstantCurrent;
  cc.current_a = 3.6;
  cc.end.charge_mah = 10.0;  // 3.6 A delivers 1 mAh per second
  p.steps = {rest, cc};
  StepEngine e(p);
  (void)e.Start(0);
  for (int t = 1; t < 10; ++t) EXPECT_TRUE(e.OnReading({double(t), 3.9, 0, 25}).changes.empty());
  auto out = e.OnReading({10, 3.9, 0, 25});
  ASSERT_EQ(out.changes.size(), 1u);
  EXPECT_EQ(out.changes[0].started_step, 1);
  int t = 10;
  while (!e.finished() && t < 100) (void)e.OnReading({double(++t), 3.8, 3.6, 25});
  // The first interval integrates from the boundary reading at 0 A: 0.5 mAh,
  // then 1 mAh per second, so 10 mAh is reached at t = 21 s.
  EXPECT_EQ(t, 21);
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

TEST(StepEngine, SnapshotRestoreContinuesTheStep) {
  Plan p = RatedCapacityPlan(Cell2500());
  p.steps[0].end.voltage_below_v.reset();
  p.steps[0].end.time_s = 100;
  StepEngine a(p);
  (void)a.Start(0);
  for (int t = 1; t <= 40; ++t) (void)a.OnReading({double(t), 3.9, 0.5, 25});
  std::string snap = a.Snapshot(40);
  StepEngine b(p);
  auto out = b.Restore(snap, 1000);  // resumed after a 960 s gap
  ASSERT_TRUE(out.ok()) << out.status().ToString();
  ASSERT_TRUE(out->setpoint.has_value());
  EXPECT_TRUE(out->setpoint->load_on);
  EXPECT_NEAR(b.step_charge_mah(), a.step_charge_mah(), 1e-12);
  // 60 s of step time remain.
  int t = 1000;
  while (!b.finished() && t < 2000) (void)b.OnReading({double(++t), 3.9, 0.5, 25});
  EXPECT_EQ(t, 1060);
  EXPECT_FALSE(b.Restore("garbage", 0).ok());
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

// The built-in plan stores procedure text that compiles back to the same step.
TEST(RatedCapacityPlan, SourceTextCompiles) {
  Plan p = RatedCapacityPlan(Cell2500());
  auto again = CompileProcedure(p.source_text, "built-in");
  ASSERT_TRUE(again.ok()) << again.status().message();
  ASSERT_EQ(again->steps.size(), 1u);
  EXPECT_DOUBLE_EQ(again->steps[0].current_a, p.steps[0].current_a);
  EXPECT_DOUBLE_EQ(*again->steps[0].end.voltage_below_v, 2.75);
}

}  // namespace
}  // namespace kp
