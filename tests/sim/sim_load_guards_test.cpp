// The simulated load's own protections: what the guardian-less path relies on
// when the controller is gone.
#include <gtest/gtest.h>

#include "drivers/inproc_transport.h"
#include "drivers/roles.h"
#include "drivers/scpi_session.h"
#include "drivers/sim/sim_bench.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

struct Bench {
  VirtualClock clock;
  sim::SimBench bench{sim::DemoLiIonCell(2.5), clock};
  ScpiSession load_s{std::make_unique<InProcTransport>(bench.load(), clock), clock};
  LoadDriver load{load_s};
  // Integrates the cell up to the clock without talking to the load.
  void Advance(double s) {
    clock.Advance(Seconds(s));
    (void)bench.cell();
  }
};

TEST(SimLoadGuards, EveryGuardReadsBackWhatWasSet) {
  Bench b;
  ASSERT_OK(b.load.SetGuard(LoadGuard::kUnderVoltage, 2.5));
  ASSERT_OK(b.load.SetGuard(LoadGuard::kOverCurrent, 3.25));
  ASSERT_OK(b.load.SetGuard(LoadGuard::kOverPower, 17.5));
  ASSERT_OK(b.load.SetGuard(LoadGuard::kWatchdog, 90));
  EXPECT_DOUBLE_EQ(*b.load.ReadGuard(LoadGuard::kUnderVoltage), 2.5);
  EXPECT_DOUBLE_EQ(*b.load.ReadGuard(LoadGuard::kOverCurrent), 3.25);
  EXPECT_DOUBLE_EQ(*b.load.ReadGuard(LoadGuard::kOverPower), 17.5);
  EXPECT_DOUBLE_EQ(*b.load.ReadGuard(LoadGuard::kWatchdog), 90);
  EXPECT_OK(b.load_s.DrainErrors());
  ASSERT_OK(b.load_s.Write("*RST"));
  EXPECT_DOUBLE_EQ(*b.load.ReadGuard(LoadGuard::kWatchdog), 0);
}

TEST(SimLoadGuards, WatchdogSwitchesTheInputOffWhenCommandsStop) {
  Bench b;
  ASSERT_OK(b.load.SetGuard(LoadGuard::kWatchdog, 10));
  ASSERT_OK(b.load.SetLevel(LoadMode::kCurrent, 1.0));
  ASSERT_OK(b.load.SetInput(true));
  b.Advance(9.0);
  EXPECT_TRUE(b.bench.load_input_on());
  ASSERT_TRUE(b.load.MeasureCurrent().ok());  // any line feeds the watchdog
  b.Advance(9.0);
  EXPECT_TRUE(b.bench.load_input_on());
  const double soc_before = b.bench.cell_soc();
  b.Advance(100.0);  // silence: off 10 s after the last line, not 100 s later
  EXPECT_FALSE(b.bench.load_input_on());
  EXPECT_EQ(b.bench.load_trip(), "watchdog");
  // 1 A for the 1 s left on the watchdog, then nothing: 1 As of a 2.5 Ah (9000 As) cell.
  EXPECT_NEAR((soc_before - b.bench.cell_soc()) * 9000.0, 1.0, 0.05);
  auto on = b.load.InputState();
  ASSERT_TRUE(on.ok());
  EXPECT_FALSE(*on);
  // Switching on again clears the trip.
  ASSERT_OK(b.load.SetInput(true));
  EXPECT_EQ(b.bench.load_trip(), "");
}

TEST(SimLoadGuards, OverCurrentAndOverPowerTrip) {
  Bench b;
  ASSERT_OK(b.load.SetGuard(LoadGuard::kOverCurrent, 2.0));
  ASSERT_OK(b.load.SetLevel(LoadMode::kCurrent, 1.5));
  ASSERT_OK(b.load.SetInput(true));
  EXPECT_TRUE(*b.load.InputState());
  ASSERT_OK(b.load.SetLevel(LoadMode::kCurrent, 2.5));
  EXPECT_FALSE(*b.load.InputState());
  EXPECT_EQ(b.bench.load_trip(), "overcurrent");

  Bench p;
  ASSERT_OK(p.load.SetGuard(LoadGuard::kOverPower, 3.0));
  ASSERT_OK(p.load.SetLevel(LoadMode::kCurrent, 0.5));  // about 2 W from a full cell
  ASSERT_OK(p.load.SetInput(true));
  EXPECT_TRUE(*p.load.InputState());
  ASSERT_OK(p.load.SetLevel(LoadMode::kCurrent, 1.0));  // about 4 W
  EXPECT_FALSE(*p.load.InputState());
  EXPECT_EQ(p.bench.load_trip(), "overpower");
}

TEST(SimLoadGuards, UnderVoltageLimitHoldsTheTerminalVoltage) {
  Bench b;
  auto open = b.load.MeasureVoltage();
  ASSERT_TRUE(open.ok());
  ASSERT_OK(b.load.SetGuard(LoadGuard::kUnderVoltage, *open - 0.05));
  ASSERT_OK(b.load.SetLevel(LoadMode::kCurrent, 20.0));  // would pull the terminal far lower
  ASSERT_OK(b.load.SetInput(true));
  auto v = b.load.MeasureVoltage();
  ASSERT_TRUE(v.ok());
  EXPECT_NEAR(*v, *open - 0.05, 1e-3);
}

TEST(LoadDriverState, ReadBackQueryFollowsTheScpiConvention) {
  EXPECT_EQ(ReadBackQuery("VOLT:PROT:LOW {}"), "VOLT:PROT:LOW?");
  EXPECT_EQ(ReadBackQuery("  INP OFF"), "INP?");
  EXPECT_EQ(ReadBackQuery("OUTP?"), "OUTP?");
  EXPECT_EQ(ReadBackQuery(""), "");
  EXPECT_EQ(ParseStateReply("1"), std::optional<bool>(true));
  EXPECT_EQ(ParseStateReply(" off\r"), std::optional<bool>(false));
  EXPECT_EQ(ParseStateReply("+0"), std::optional<bool>(false));
  EXPECT_EQ(ParseStateReply("9.9E37"), std::nullopt);
  EXPECT_EQ(ParseStateReply("ONX"), std::nullopt);
}

}  // namespace
}  // namespace kp
