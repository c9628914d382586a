#include "analysis/life.h"

#include <gtest/gtest.h>

#include "analysis/quantity.h"

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

TEST(Life, ProfileTextParses) {
  ProfileParse p = ParseDutyProfile(
      "# sensor node, one report every 10 minutes\n"
      "compress 100\n"
      "8uA for 599.5s compressed\n"
      "\n"
      "25mA for 500ms   # radio burst\n");
  ASSERT_TRUE(p.profile.has_value()) << p.error;
  ASSERT_EQ(p.profile->levels.size(), 2u);
  EXPECT_DOUBLE_EQ(p.profile->compression_factor, 100.0);
  EXPECT_TRUE(p.profile->levels[0].compressed);
  EXPECT_DOUBLE_EQ(p.profile->levels[1].duration_s, 0.5);
  EXPECT_NEAR(ProfileAverageCurrentA(*p.profile), 28.8e-6, 0.05e-6);
}

TEST(Life, ProfileErrorsNameLineAndColumn) {
  EXPECT_EQ(ParseDutyProfile("8uA for 10s\n  25mQ for 1s\n").error.rfind("2:5:", 0), 0u)
      << ParseDutyProfile("8uA for 10s\n  25mQ for 1s\n").error;
  EXPECT_EQ(ParseDutyProfile("8uA during 10s\n").error.rfind("1:1:", 0), 0u);
  EXPECT_EQ(ParseDutyProfile("8uA for 10s sometimes\n").error.rfind("1:13:", 0), 0u);
  EXPECT_EQ(ParseDutyProfile("compress 0.5\n8uA for 1s").error.rfind("1:10:", 0), 0u);
  EXPECT_FALSE(ParseDutyProfile("# nothing\n").profile.has_value());
}

TEST(Quantity, UnitsAndErrors) {
  EXPECT_DOUBLE_EQ(*ParseQuantity("40uA", QuantityKind::kCurrent).value, 40e-6);
  EXPECT_DOUBLE_EQ(*ParseQuantity("40\xC2\xB5"
                                  "A",
                                  QuantityKind::kCurrent)
                        .value,
                   40e-6);
  EXPECT_DOUBLE_EQ(*ParseQuantity("2000mAh", QuantityKind::kCharge).value, 2000.0);
  EXPECT_DOUBLE_EQ(*ParseQuantity("2.5Ah", QuantityKind::kCharge).value, 2500.0);
  EXPECT_DOUBLE_EQ(*ParseQuantity("2%/month", QuantityKind::kRatePerMonth).value, 0.02);
  EXPECT_NEAR(*ParseQuantity("12%/year", QuantityKind::kRatePerMonth).value, 0.01, 1e-15);
  EXPECT_DOUBLE_EQ(*ParseQuantity("90%", QuantityKind::kFraction).value, 0.9);
  EXPECT_DOUBLE_EQ(*ParseQuantity("0.9", QuantityKind::kFraction).value, 0.9);
  EXPECT_DOUBLE_EQ(*ParseQuantity("2min", QuantityKind::kDuration).value, 120.0);
  ParsedQuantity bad = ParseQuantity("40uV", QuantityKind::kCurrent);
  EXPECT_FALSE(bad.value.has_value());
  EXPECT_EQ(bad.error_column, 3u);
  EXPECT_NE(bad.error.find("uV"), std::string::npos);
  EXPECT_FALSE(ParseQuantity("mA", QuantityKind::kCurrent).value.has_value());
  EXPECT_FALSE(ParseQuantity("-3mA", QuantityKind::kCurrent).value.has_value());
}

}  // namespace
}  // namespace kp
