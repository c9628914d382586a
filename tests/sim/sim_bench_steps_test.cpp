// SimBench integrates the cell lazily with step lengths chosen by what the
// current depends on; long steps must give the same answer as short ones.
#include <gtest/gtest.h>

#include "drivers/inproc_transport.h"
#include "drivers/roles.h"
#include "drivers/scpi_session.h"
#include "drivers/sim/cell_file.h"
#include "drivers/sim/sim_bench.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

struct Bench {
  VirtualClock clock;
  sim::SimBench bench;
  ScpiSession load_s{std::make_unique<InProcTransport>(bench.load(), clock), clock};
  ScpiSession meter_s{std::make_unique<InProcTransport>(bench.meter(), clock), clock};
  LoadDriver load{load_s};
  MeterDriver meter{meter_s};
  explicit Bench(sim::CellParams p) : bench(std::move(p), clock) {}
};

// Constant current read once at the end (long exact steps) against the same
// discharge read every second (1 s steps): same voltage, charge and heat.
TEST(SimBenchSteps, LongStepsAgreeWithShortOnes) {
  Bench once(sim::DemoLiIonCell()), often(sim::DemoLiIonCell());
  for (Bench* b : {&once, &often}) {
    ASSERT_OK(b->load.SetLevel(LoadMode::kCurrent, 1.0));
    ASSERT_OK(b->load.SetInput(true));
  }
  once.clock.Advance(Seconds(7200));
  for (int t = 0; t < 7200; ++t) {
    often.clock.Advance(Seconds(1));
    ASSERT_TRUE(often.meter.MeasureVoltage().ok());
  }
  auto v1 = once.meter.MeasureVoltage(), v2 = often.meter.MeasureVoltage();
  ASSERT_TRUE(v1.ok() && v2.ok());
  EXPECT_NEAR(*v1, *v2, 1e-3);
  // Only the self-discharge leak is split from the well update (error ~λ·I·dt²).
  EXPECT_NEAR(once.bench.cell_soc(), often.bench.cell_soc(), 1e-6);
  EXPECT_NEAR(once.bench.cell_temperature_c(), often.bench.cell_temperature_c(), 0.02);
}

// A month (30.44 days) on the shelf through the bench: self-discharge as the file says
// (2.5 %/month for the demo cell; Li-ion 2-3 %/month, cell makers' datasheets,
// secondary), and the voltage read afterwards reflects it.
TEST(SimBenchSteps, MonthOnTheShelf) {
  Bench b(sim::DemoLiIonCell());
  auto v0 = b.meter.MeasureVoltage();
  b.clock.Advance(Seconds(365.25 / 12.0 * 86400.0));  // one month: 30.4375 days, a twelfth of 365.25
  auto v1 = b.meter.MeasureVoltage();
  ASSERT_TRUE(v0.ok() && v1.ok());
  EXPECT_NEAR(b.bench.cell_soc(), 1.0 - sim::DemoLiIonCell().self_discharge_per_month, 1e-9);
  EXPECT_LT(*v1, *v0 - 0.005);
}

// The thermal-runaway fault still heats the cell past any safety limit.
TEST(SimBenchSteps, RunawayFaultHeatsTheCell) {
  sim::SimOptions o;
  o.runaway_start_s = 100;
  VirtualClock clock;
  sim::SimBench bench(sim::DemoLiIonCell(), clock, o);
  clock.Advance(Seconds(99));
  (void)bench.cell();
  EXPECT_NEAR(bench.cell_temperature_c(), sim::DemoLiIonCell().ambient_c, 1e-9);
  clock.Advance(Seconds(1200));
  (void)bench.cell();
  EXPECT_GT(bench.cell_temperature_c(), 80.0);
}

// A climate chamber: a colder surrounding cools the resting cell towards it
// and raises its resistance (Arrhenius).
TEST(SimBenchSteps, AmbientChangeCoolsTheCell) {
  VirtualClock clock;
  sim::SimBench bench(sim::DemoLiIonCell(), clock);
  double r_warm = bench.cell().R0();
  bench.SetAmbient(0.0);
  clock.Advance(Seconds(6 * 3600));
  sim::CellModel m = bench.cell();
  EXPECT_NEAR(m.temperature_c(), 0.0, 0.01);
  EXPECT_GT(m.R0(), 1.5 * r_warm);
}

TEST(SimBenchSteps, LoadCellTakesANameOrAFile) {
  auto named = sim::LoadCell("nimh");
  ASSERT_TRUE(named.ok()) << named.status().ToString();
  EXPECT_EQ(named->params.chemistry, "nimh");
  auto missing = sim::LoadCell("no/such/cell.toml");
  ASSERT_FALSE(missing.ok());
  EXPECT_NE(missing.status().message().find("no/such/cell.toml"), std::string::npos);
}

}  // namespace
}  // namespace kp
