// Reading hygiene: a frozen meter is caught by default (chemistry-aware, in
// charge), late and duplicate replies never become samples, and a run with
// readings missing for much of its discharge is not judged.
#include <gtest/gtest.h>

#include "analysis/metrics.h"
#include "rig/stuck_watch.h"
#include "tests/support/fixtures.h"
#include "tests/support/hostile_device.h"
#include "tests/support/test_support.h"
#include "ui/report/run_report.h"

namespace kp {
namespace {

using testing::HostileRig;

TEST(StuckWatch, FlatterChemistriesAllowMoreChargeAtOneReading) {
  EXPECT_GT(StuckChargeShare("lifepo4"), StuckChargeShare("nimh"));
  EXPECT_GT(StuckChargeShare("nimh"), StuckChargeShare("li-ion"));
  StuckWatch w(2500, "li-ion");
  EXPECT_DOUBLE_EQ(w.limit_mah(), 25.0);
}

TEST(StuckWatch, CountsOnlyWhileDischargingAndResetsOnAnyChange) {
  StuckWatch w(2500, "li-ion");
  // At rest (no charge moving) an unchanged reading is normal.
  for (int i = 0; i < 1000; ++i) EXPECT_FALSE(w.Observe(3.9, 0.0));
  // Discharging 1 mAh per reading: stuck after more than 25 mAh, not before.
  std::optional<std::string> why;
  int n = 0;
  while (!why && n < 100) why = w.Observe(3.7, 1.0), ++n;
  ASSERT_TRUE(why.has_value());
  EXPECT_EQ(n, 27);  // the first reading sets the value; 26 more move 26 mAh > 25
  StuckWatch v(2500, "li-ion");
  for (int i = 0; i < 100; ++i) EXPECT_FALSE(v.Observe(3.7 - 0.0001 * (i % 2), 1.0)) << i;
}

// A meter that freezes mid-discharge used to run the cell to the 1.5x charge
// limit; now the run stops within the stuck limit, the load off.
TEST(ReadingHygiene, AFrozenMeterStopsTheRunByDefault) {
  HostileRig h;
  h.meter_dev.replace_when = [&](std::string_view l) { return l.rfind("MEAS", 0) == 0 && h.f.clock.Now().count() > 1800; };
  h.meter_dev.reply_text = "+3.71000E+00";
  RunResult r = h.Run(testing::CompileForCell2500("discharge 0.5C until voltage<=2.75V every=2s\n"));
  EXPECT_EQ(r.outcome, Outcome::kAborted) << r.reason;
  EXPECT_NE(r.reason.find("looks stuck"), std::string::npos) << r.reason;
  EXPECT_FALSE(h.bench.load_input_on());
  auto samples = h.f.store->LoadSamples(r.run_id);
  ASSERT_TRUE(samples.ok());
  // Frozen at 1800 s; 1 % of 2500 mAh at 1.25 A is 72 s more (plus a reading or two).
  EXPECT_LT(samples->back().t_s, 1800 + 90);
  EXPECT_LT(DeliveredChargeMah(*samples), 700.0);
}

// Replies that come twice or late reach the run as resynchronisations, never
// as readings: every stored voltage is one the simulated cell could show.
TEST(ReadingHygiene, DuplicateAndLateRepliesNeverBecomeSamples) {
  HostileRig h;
  h.load_dev.twice_at = 40;
  h.meter_dev.late_at = 25;
  h.meter_dev.twice_at = 60;
  RunResult r = h.Run(testing::CompileForCell2500("discharge 1A until voltage<=2.75V every=5s\n"));
  EXPECT_EQ(r.outcome, Outcome::kCompleted) << r.reason;
  EXPECT_GE(h.meter_s.resync_count(), 2);
  EXPECT_GE(h.load_s.resync_count(), 1);
  const std::vector<Sample> stored = h.f.Samples(r.run_id);
  ASSERT_FALSE(stored.empty());
  for (const Sample& s : stored) {
    EXPECT_GT(s.voltage_v, 2.5) << s.t_s;
    EXPECT_LT(s.voltage_v, 4.3) << s.t_s;
    if (s.t_s > 1) EXPECT_NEAR(s.current_a, 1.0, 0.01) << s.t_s;
  }
  EXPECT_FALSE(h.bench.load_input_on());
}

}  // namespace
}  // namespace kp
