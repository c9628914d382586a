#include "analysis/life.h"

#include <gtest/gtest.h>


namespace kp {
namespace {

// 2,000 mAh at an average of 40 µA lasts 50,000 h ≈ 5.7 years (battery-life
// arithmetic Q = I·t, common practice, no source).
TEST(Life, WorkedExampleWithoutAllowances) {
  LifeInputs in;
  in.capacity_mah = 2000.0;
  in.average_current_a = 40e-6;
  LifeOutcome r = ProjectLife(in);
  ASSERT_TRUE(r.projection.has_value()) << r.error;
  EXPECT_NEAR(r.projection->hours, 50000.0, 1e-6);
  EXPECT_NEAR(r.projection->years, 5.7, 0.01);
  EXPECT_TRUE(r.projection->allowances.empty());
  EXPECT_FALSE(r.projection->assumptions.empty());
}

// Duty-cycle average current is the time-weighted mean (common practice, no
// source): 8 µA for 599.5 s plus 25 mA for 0.5 s over 600 s ≈ 28.8 µA.
TEST(Life, DutyCycleAverageIsTimeWeightedMean) {
  DutyProfile p;
  p.levels = {{8e-6, 599.5, true}, {25e-3, 0.5, false}};
  EXPECT_NEAR(ProfileAverageCurrentA(p), (8e-6 * 599.5 + 0.025 * 0.5) / 600.0, 1e-15);
  EXPECT_NEAR(ProfileAverageCurrentA(p), 28.8e-6, 0.05e-6);
  EXPECT_DOUBLE_EQ(ProfilePeakCurrentA(p), 25e-3);
  EXPECT_DOUBLE_EQ(ProfileCycleS(p), 600.0);
  // Compressed 100× in the test: the sleep lasts 5.995 s there.
  p.compression_factor = 100.0;
  EXPECT_NEAR(ProfileTestAverageCurrentA(p), (8e-6 * 5.995 + 0.025 * 0.5) / 6.495, 1e-15);
  EXPECT_NEAR(ProfileAverageCurrentA(p), 28.8e-6, 0.05e-6);
}

TEST(Life, AllowancesAppliedOnlyWhenAsked) {
  LifeInputs in;
  in.capacity_mah = 2000.0;
  in.average_current_a = 40e-6;
  in.self_discharge_per_month = 0.02;
  LifeOutcome r = ProjectLife(in);
  ASSERT_TRUE(r.projection.has_value());
  ASSERT_EQ(r.projection->allowances.size(), 1u);
  EXPECT_EQ(r.projection->allowances[0], "self-discharge");
  // 2 % of 2 Ah per 730.5 h as a drain: hours = 2 / (40e-6 + 0.04 / 730.5).
  double sd_a = 0.02 * 2.0 / kHoursPerMonth;
  EXPECT_NEAR(r.projection->self_discharge_a, sd_a, 1e-15);
  EXPECT_NEAR(r.projection->hours, 2.0 / (40e-6 + sd_a), 1e-6);
  EXPECT_LT(r.projection->hours, 50000.0);

  LifeInputs reg;
  reg.capacity_mah = 2000.0;
  reg.average_current_a = 40e-6;
  reg.efficiency = 0.8;
  reg.quiescent_a = 1e-6;
  LifeOutcome q = ProjectLife(reg);
  ASSERT_TRUE(q.projection.has_value());
  EXPECT_NEAR(q.projection->battery_current_a, 40e-6 / 0.8 + 1e-6, 1e-18);
  EXPECT_NEAR(q.projection->hours, 2.0 / (51e-6), 1e-6);
  EXPECT_EQ(q.projection->allowances.size(), 2u);

  PeukertFit f;
  f.exponent_k = 1.1;
  f.capacity_constant = 2.0;  // A^k·h
  LifeInputs pk;
  pk.capacity_mah = 2000.0;
  pk.average_current_a = 0.1;
  pk.peukert = f;
  LifeOutcome d = ProjectLife(pk);
  ASSERT_TRUE(d.projection.has_value());
  EXPECT_NEAR(d.projection->hours, f.HoursAt(0.1), 1e-9);
}

TEST(Life, RejectsBadInput) {
  LifeInputs in;
  in.capacity_mah = 2000.0;
  EXPECT_FALSE(ProjectLife(in).projection.has_value());
  in.average_current_a = 1e-5;
  in.efficiency = 1.5;
  LifeOutcome r = ProjectLife(in);
  EXPECT_FALSE(r.projection.has_value());
  EXPECT_NE(r.error.find("efficiency"), std::string::npos);
}

}  // namespace
}  // namespace kp
