#include "analysis/metrics.h"

#include <gtest/gtest.h>

#include <vector>

namespace kp {
namespace {

std::vector<Sample> Constant(double current_a, double voltage_v, double hours, double step_s) {
  std::vector<Sample> s;
  for (double t = 0; t <= hours * 3600.0 + 1e-9; t += step_s) s.push_back({t, voltage_v, current_a, 25.0, 0});
  return s;
}

// Q = I·t; mAh = mA × h (common practice, no source).
TEST(Metrics, ConstantCurrentFiveHoursIsExactly2500mAh) {
  auto s = Constant(0.5, 3.7, 5.0, 1.0);
  EXPECT_NEAR(DeliveredChargeMah(s), 2500.0, 1e-9);
  EXPECT_NEAR(DeliveredEnergyWh(s), 0.5 * 3.7 * 5.0, 1e-9);
  EXPECT_DOUBLE_EQ(DurationS(s), 5.0 * 3600.0);
}

// A rated 1,800 mAh cell supplies 900 mA for 2 h or 3,600 mA for 30 min
// (common practice, no source).
TEST(Metrics, RatingArithmetic) {
  EXPECT_NEAR(DeliveredChargeMah(Constant(0.9, 3.6, 2.0, 7.0)), 1800.0, 0.9 * 7 / 3.6 + 1e-9);
  EXPECT_NEAR(DeliveredChargeMah(Constant(3.6, 3.6, 0.5, 0.5)), 1800.0, 1e-9);
  EXPECT_NEAR(DeliveredChargeMah(Constant(1.8, 3.6, 1.0, 1.0)), 1800.0, 1e-9);
}

// The trapezoid rule is exact for a linear current ramp: ∫0^T (a + b t) dt =
// aT + bT²/2 (analytic), however unevenly sampled.
TEST(Metrics, LinearRampIntegratesExactlyOnUnevenSpacing) {
  const double a = 0.2, b = 1e-4, T = 3600.0;
  std::vector<Sample> s;
  double t = 0;
  int k = 0;
  while (t < T) {
    s.push_back({t, 3.0, a + b * t, 25.0, 0});
    t += (k++ % 3 == 0) ? 0.7 : 13.1;
  }
  s.push_back({T, 3.0, a + b * T, 25.0, 0});
  double expected_as = a * T + b * T * T / 2.0;
  EXPECT_NEAR(DeliveredChargeMah(s), expected_as / 3.6, 1e-9);
}

TEST(Metrics, MeanVoltageIsTimeWeighted) {
  // 1 h at 4 V then a single sample 10 h later at 2 V: the ramp between them dominates.
  std::vector<Sample> s = {{0, 4.0, 0.1, 25, 0}, {3600, 4.0, 0.1, 25, 0}, {3600 * 11, 2.0, 0.1, 25, 0}};
  EXPECT_NEAR(MeanVoltage(s), (4.0 * 3600 + 3.0 * 36000) / 39600.0, 1e-12);
}

TEST(Metrics, EmptyAndSingleSample) {
  std::vector<Sample> none;
  EXPECT_EQ(DeliveredChargeMah(none), 0.0);
  EXPECT_FALSE(MaxTemperatureC(none).has_value());
  std::vector<Sample> one = {{5, 3.3, 1.0, 30, 0}};
  EXPECT_EQ(DeliveredChargeMah(one), 0.0);
  EXPECT_DOUBLE_EQ(MeanVoltage(one), 3.3);
}

// Rated-capacity criterion: >= 100 % of rated passes (IEC 61960-3 clause
// 7.3.1, from memory).
TEST(Metrics, CapacityVerdict) {
  EXPECT_TRUE(JudgeCapacity(2500.0, 2500.0).pass);
  EXPECT_FALSE(JudgeCapacity(2499.0, 2500.0).pass);
  EXPECT_NEAR(JudgeCapacity(2561.0, 2500.0).percent_of_rated, 102.44, 1e-9);
  EXPECT_FALSE(JudgeCapacity(100.0, 0.0).pass);
}

}  // namespace
}  // namespace kp
