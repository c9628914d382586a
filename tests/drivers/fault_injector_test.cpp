#include "drivers/sim/fault_injector.h"

#include <gtest/gtest.h>

#include "drivers/scpi_syntax.h"
#include "drivers/sim/sim_bench.h"

namespace kp::sim {
namespace {

struct Fixture {
  VirtualClock clock;
  SimBench bench{DemoLiIonCell(2.56), clock};
};

TEST(FaultInjector, CountsQueriesOnlyAndHitsTheSameOnes) {
  Fixture f;
  FaultOptions o;
  o.drop_every = 3;
  FaultInjector inj(f.bench.meter(), o);
  std::vector<bool> answered;
  for (int i = 0; i < 6; ++i) {
    (void)inj.Respond("*CLS");  // commands are never faulted nor counted
    answered.push_back(inj.Respond("MEAS:VOLT:DC?").reply.has_value());
  }
  EXPECT_EQ(answered, (std::vector<bool>{true, true, false, true, true, false}));
  EXPECT_EQ(inj.faults_injected(), 2);
}

TEST(FaultInjector, CorruptedReplyIsNotANumber) {
  Fixture f;
  FaultOptions o;
  o.corrupt_every = 1;
  FaultInjector inj(f.bench.meter(), o);
  auto r = inj.Respond("MEAS:VOLT:DC?");
  ASSERT_TRUE(r.reply);
  EXPECT_FALSE(ParseScpiNumber(*r.reply).ok()) << *r.reply;
}

TEST(FaultInjector, ScpiErrorGoesThroughTheErrorQueue) {
  Fixture f;
  FaultOptions o;
  o.error_every = 2;
  FaultInjector inj(f.bench.thermometer(), o);
  EXPECT_TRUE(ParseScpiNumber(*inj.Respond("MEAS:TEMP?").reply)->finite());
  EXPECT_EQ(ParseScpiNumber(*inj.Respond("MEAS:TEMP?").reply)->kind, ScpiNumber::Kind::kNotANumber);
  EXPECT_EQ(*inj.Respond("SYST:ERR?").reply, "-230,\"Data corrupt or stale\"");
  EXPECT_EQ(*inj.Respond("SYST:ERR?").reply, "0,\"No error\"");
}

TEST(FaultInjector, StuckReadingRepeatsWhileTheCellMoves) {
  Fixture f;
  FaultOptions o;
  o.stick_at = 2;
  FaultInjector load(f.bench.load(), o);
  FaultInjector meter(f.bench.meter(), o);
  (void)load.Respond("CURR 2.5");
  (void)load.Respond("INP ON");
  (void)meter.Respond("MEAS:VOLT:DC?");
  std::string frozen = *meter.Respond("MEAS:VOLT:DC?").reply;
  f.clock.Advance(Seconds(1800));
  EXPECT_EQ(*meter.Respond("MEAS:VOLT:DC?").reply, frozen);
  EXPECT_LT(f.bench.cell_soc(), 0.75);  // the real cell did discharge
  EXPECT_EQ(meter.faults_injected(), 1);
}

TEST(FaultInjector, DisconnectOnceAndDelay) {
  Fixture f;
  FaultOptions o;
  o.disconnect_at = 1;
  o.delay_every = 2;
  o.delay_s = 0.25;
  FaultInjector inj(f.bench.meter(), o);
  FaultedReply a = inj.Respond("*IDN?");
  EXPECT_TRUE(a.disconnect);
  EXPECT_FALSE(a.reply);
  FaultedReply b = inj.Respond("*IDN?");
  EXPECT_FALSE(b.disconnect);
  EXPECT_DOUBLE_EQ(b.delay.count(), 0.25);
  EXPECT_TRUE(b.reply);
  EXPECT_FALSE(inj.Respond("*IDN?").disconnect);  // only once
}

}  // namespace
}  // namespace kp::sim
