// The temperature chamber: the simulated chamber's first-order lag, the soak
// judgement in virtual time, and the chamber's safety limits.
#include "drivers/chamber.h"

#include <cmath>

#include <gtest/gtest.h>

#include "drivers/inproc_transport.h"
#include "drivers/profile.h"
#include "drivers/sim/sim_bench.h"
#include "drivers/sim/sim_chamber.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

struct Chamber {
  VirtualClock clock;
  sim::SimBench bench{sim::DemoLiIonCell(2.56), clock};
  sim::SimChamber sim{clock, sim::SimChamberOptions{.tau_s = 600.0, .room_c = 23.0}, &bench};
  ScpiSession session{std::make_unique<InProcTransport>(sim, clock, "sim-chamber"), clock, ScpiOptions{.check_settings = true}};
};

TEST(Chamber, FollowsTheSetPointAsAFirstOrderLag) {
  Chamber c;
  ChamberDriver d(c.session);
  ASSERT_OK(d.SetTemperature(45.0));
  ASSERT_OK(d.Run(true));
  // Step response of a first-order lag: T(t) = Tf + (T0 − Tf)·e^(−t/tau),
  // 63.2 % of the step after one time constant (textbook first-order system,
  // from memory).
  c.clock.Advance(Seconds(600));
  auto t = d.ReadTemperature();
  ASSERT_TRUE(t.ok()) << t.status().ToString();
  // (Replies carry six significant digits, NR3 with five decimals.)
  EXPECT_NEAR(*t, 45.0 - 22.0 * std::exp(-1.0), 1e-4);
  EXPECT_NEAR((*t - 23.0) / 22.0, 0.632, 0.001);
  c.clock.Advance(Seconds(1800));  // four time constants in all
  t = d.ReadTemperature();
  ASSERT_TRUE(t.ok());
  EXPECT_NEAR(*t, 45.0 - 22.0 * std::exp(-4.0), 1e-4);
  // The cell's surroundings are the chamber's air.
  c.clock.Advance(Seconds(4 * 3600));
  (void)d.ReadTemperature();
  EXPECT_NEAR(c.bench.cell_temperature_c(), 45.0, 0.5);
  // Stopped, it drifts back to the room.
  ASSERT_OK(d.Run(false));
  c.clock.Advance(Seconds(600 * 20));
  t = d.ReadTemperature();
  ASSERT_TRUE(t.ok());
  EXPECT_NEAR(*t, 23.0, 1e-3);
}

TEST(Chamber, SoakEndsAfterHoldingInTheBandInVirtualTime) {
  Chamber c;
  ChamberDriver d(c.session);
  ASSERT_OK(d.SetTemperature(45.0));
  ASSERT_OK(d.Run(true));
  SoakJudge soak(SoakSpec{.setpoint_c = 45.0, .band_c = 0.5, .hold_s = 600.0, .max_s = 4 * 3600.0}, 0.0);
  const double period_s = 30.0;
  double t_s = 0.0;
  while (soak.state() == SoakJudge::State::kSettling) {
    c.clock.Advance(Seconds(period_s));
    t_s += period_s;
    auto temp = d.ReadTemperature();
    ASSERT_TRUE(temp.ok()) << temp.status().ToString();
    soak.OnReading(t_s, *temp);
  }
  ASSERT_EQ(soak.state(), SoakJudge::State::kStable) << soak.Describe();
  // In the band once 22·e^(−t/600) <= 0.5: t = 600·ln(44) = 2270.6 s; the
  // first reading after that is at 2280 s, and the hold ends 600 s later.
  EXPECT_DOUBLE_EQ(*soak.in_band_since_s(), 2280.0);
  EXPECT_DOUBLE_EQ(t_s, 2880.0);
  EXPECT_NE(soak.Describe().find("stable at 45.0 degC"), std::string::npos) << soak.Describe();
}

TEST(Chamber, SoakTimesOutAndAReadingOutsideTheBandRestartsTheHold) {
  SoakJudge never(SoakSpec{.setpoint_c = 45.0, .band_c = 0.5, .hold_s = 600.0, .max_s = 1800.0}, 100.0);
  for (double t = 100.0; t <= 2000.0 && never.state() == SoakJudge::State::kSettling; t += 60.0) never.OnReading(t, 40.0);
  EXPECT_EQ(never.state(), SoakJudge::State::kTimedOut);
  EXPECT_NE(never.Describe().find("not stable"), std::string::npos);

  SoakJudge s(SoakSpec{.setpoint_c = 25.0, .band_c = 1.0, .hold_s = 300.0, .max_s = 7200.0}, 0.0);
  EXPECT_EQ(s.OnReading(0, 25.5), SoakJudge::State::kSettling);
  EXPECT_EQ(s.OnReading(200, 24.2), SoakJudge::State::kSettling);
  EXPECT_EQ(s.OnReading(250, 26.5), SoakJudge::State::kSettling) << "outside: the count restarts";
  EXPECT_FALSE(s.in_band_since_s().has_value());
  EXPECT_EQ(s.OnReading(300, 25.9), SoakJudge::State::kSettling);
  EXPECT_EQ(s.OnReading(590, 25.1), SoakJudge::State::kSettling);
  EXPECT_EQ(s.OnReading(600, 25.0), SoakJudge::State::kStable);
}

TEST(Chamber, LimitsRefuseSetPointsAndAlarmOnRunawayReadings) {
  Chamber c;
  ChamberDriver limited(c.session, {}, ChamberLimits{.min_c = -10.0, .max_c = 30.0, .alarm_margin_c = 5.0});
  Status high = limited.SetTemperature(45.0);
  EXPECT_EQ(high.code(), StatusCode::kLimitExceeded) << high.ToString();
  EXPECT_NE(high.message().find("above the limit 30.0 degC"), std::string::npos) << high.message();
  EXPECT_EQ(limited.SetTemperature(-20.0).code(), StatusCode::kLimitExceeded);
  auto set = c.session.Query("TEMP:SETP?");
  ASSERT_TRUE(set.ok());
  EXPECT_EQ(*set, FormatNr3(23.0)) << "a refused set point is never sent";
  // Someone else drives the chamber to 45 degC: the limited driver's readings alarm.
  ChamberDriver free(c.session);
  ASSERT_OK(free.SetTemperature(45.0));
  ASSERT_OK(free.Run(true));
  c.clock.Advance(Seconds(3600));
  auto t = limited.ReadTemperature();
  ASSERT_FALSE(t.ok());
  EXPECT_EQ(t.status().code(), StatusCode::kLimitExceeded);
  // The simulated chamber refuses what it cannot reach, through its error queue.
  Status beyond = free.SetTemperature(400.0);
  EXPECT_EQ(beyond.code(), StatusCode::kInstrumentError) << beyond.ToString();
}

TEST(Chamber, DialectRoleAndItsRequiredKeys) {
  auto found = FindProfile("kneepoint-sim-chamber", "/nonexistent");
  ASSERT_TRUE(found.ok()) << found.status().ToString();
  auto p = LoadProfileFile(*found);
  ASSERT_TRUE(p.ok()) << p.status().ToString();
  EXPECT_TRUE(p->HasRole("chamber"));
  EXPECT_EQ(p->chamber.set_temperature, "TEMP:SETP {}");
  EXPECT_TRUE(IdentityMatches(p->identity, "Kneepoint Simulation,KP-SIM-CHAMBER,SN0005,1.0"));
  auto missing = ParseProfile("roles = [\"chamber\"]\n[commands]\nchamber-setpoint = \"SP {}\"\n", "c.kpd");
  ASSERT_FALSE(missing.ok());
  EXPECT_NE(missing.status().message().find("role 'chamber' needs key 'chamber-read'"), std::string::npos) << missing.status().message();
}

}  // namespace
}  // namespace kp
