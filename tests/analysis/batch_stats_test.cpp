// Batch statistics against a hand computation (worked below, step by step).
#include <gtest/gtest.h>

#include <cmath>

#include "analysis/batch_stats.h"

namespace kp {
namespace {

// Six capacities in mAh, one cell clearly short. By hand:
//   mean   = (2500 + 2510 + 2490 + 2505 + 2495 + 2380) / 6 = 14880 / 6 = 2480
//   deviations from the mean: 20, 30, 10, 25, 15, -100; squares sum to
//   400 + 900 + 100 + 625 + 225 + 10000 = 12250; sd = sqrt(12250 / 5) = sqrt(2450) = 49.49747...
//   sorted: 2380 2490 2495 2500 2505 2510 -> median = (2495 + 2500) / 2 = 2497.5
//   |x - median|: 2.5 12.5 7.5 7.5 2.5 117.5 -> sorted 2.5 2.5 7.5 7.5 12.5 117.5 -> MAD = 7.5
//   modified z of 2380 = 0.6745 * (2380 - 2497.5) / 7.5 = 0.6745 * -15.6667 = -10.5672 -> outlier
//   modified z of 2510 = 0.6745 * 12.5 / 7.5 = 1.12417 -> not
TEST(BatchStats, MatchesAHandComputation) {
  const std::vector<double> cap = {2500, 2510, 2490, 2505, 2495, 2380};
  BatchStats s = ComputeBatchStats(cap);
  EXPECT_EQ(s.n, 6);
  EXPECT_DOUBLE_EQ(s.mean, 2480.0);
  ASSERT_TRUE(s.stddev.has_value());
  EXPECT_NEAR(*s.stddev, std::sqrt(2450.0), 1e-9);
  EXPECT_NEAR(*s.stddev, 49.4974747, 1e-6);
  EXPECT_DOUBLE_EQ(s.min, 2380.0);
  EXPECT_DOUBLE_EQ(s.max, 2510.0);
  EXPECT_DOUBLE_EQ(s.median, 2497.5);
  EXPECT_DOUBLE_EQ(s.mad, 7.5);
  EXPECT_NEAR(s.modified_z[5], -10.5672, 1e-4);
  EXPECT_NEAR(s.modified_z[1], 1.12417, 1e-5);
  for (size_t i = 0; i < cap.size(); ++i) EXPECT_EQ(s.outlier[i], i == 5) << i;
  ASSERT_TRUE(s.cv().has_value());
  EXPECT_NEAR(*s.cv(), 49.4974747 / 2480.0, 1e-9);
}

// MAD = 0 (more than half equal): the mean absolute deviation takes over.
//   {10, 10, 10, 10, 12}: median 10, |x - median| = 0 0 0 0 2, MAD 0;
//   mean absolute deviation = 2 / 5 = 0.4; z(12) = 0.7979 * 2 / 0.4 = 3.9895 > 3.5 -> outlier.
TEST(BatchStats, FallsBackToTheMeanAbsoluteDeviation) {
  BatchStats s = ComputeBatchStats(std::vector<double>{10, 10, 10, 10, 12});
  EXPECT_DOUBLE_EQ(s.mad, 0.0);
  EXPECT_NEAR(s.modified_z[4], 3.9895, 1e-9);
  EXPECT_TRUE(s.outlier[4]);
  EXPECT_FALSE(s.outlier[0]);
  // All equal: nothing to flag, no division by zero.
  BatchStats same = ComputeBatchStats(std::vector<double>{7, 7, 7});
  EXPECT_DOUBLE_EQ(*same.stddev, 0.0);
  for (bool o : same.outlier) EXPECT_FALSE(o);
}

TEST(BatchStats, SmallBatches) {
  BatchStats none = ComputeBatchStats(std::vector<double>{});
  EXPECT_EQ(none.n, 0);
  BatchStats one = ComputeBatchStats(std::vector<double>{2500});
  EXPECT_FALSE(one.stddev.has_value());
  EXPECT_DOUBLE_EQ(one.median, 2500.0);
  // Two cells far apart: below three values nothing is called an outlier.
  BatchStats two = ComputeBatchStats(std::vector<double>{1000, 3000});
  EXPECT_FALSE(two.outlier[0] || two.outlier[1]);
  EXPECT_NEAR(*two.stddev, std::sqrt(2000000.0), 1e-9);
}

}  // namespace
}  // namespace kp
