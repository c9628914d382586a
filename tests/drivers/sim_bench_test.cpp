#include "drivers/sim/sim_bench.h"

#include <gtest/gtest.h>

#include "drivers/inproc_transport.h"
#include "drivers/roles.h"
#include "drivers/scpi_session.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

struct Bench {
  VirtualClock clock;
  sim::SimBench bench{sim::DemoLiIonCell(2.5), clock};
  ScpiSession load_s{std::make_unique<InProcTransport>(bench.load(), clock), clock};
  ScpiSession meter_s{std::make_unique<InProcTransport>(bench.meter(), clock), clock};
  LoadDriver load{load_s};
  MeterDriver meter{meter_s};
};

// Maximum power transfer: with the load resistance equal to the source's
// internal resistance, the terminal voltage is half the open-circuit voltage
// (textbook circuit theory).
TEST(SimBench, MatchedLoadHalvesTheVoltage) {
  Bench b;
  auto open = b.meter.MeasureVoltage();
  ASSERT_TRUE(open.ok());
  ASSERT_OK(b.load.SetLevel(LoadMode::kResistance, sim::DemoLiIonCell().r0_ohm));
  ASSERT_OK(b.load.SetInput(true));
  auto loaded = b.meter.MeasureVoltage();
  ASSERT_TRUE(loaded.ok());
  EXPECT_NEAR(*loaded, *open / 2.0, 1e-5);
  auto i = b.load.MeasureCurrent();
  ASSERT_TRUE(i.ok());
  EXPECT_NEAR(*i, *open / (2.0 * sim::DemoLiIonCell().r0_ohm), 1e-3);
}

TEST(SimBench, ConstantCurrentDrainsChargeAtTheSetRate) {
  Bench b;
  ASSERT_OK(b.load.SetLevel(LoadMode::kCurrent, 1.25));
  ASSERT_OK(b.load.SetInput(true));
  b.clock.Advance(Seconds(3600));  // 1.25 Ah out of 2.5 Ah
  ASSERT_TRUE(b.meter.MeasureVoltage().ok());
  // The demo cell also self-discharges (2.5 %/month: about 2e-5 of its charge
  // in this hour), so the drained half is exact only to that much.
  EXPECT_NEAR(b.bench.cell_soc(), 0.5, 1e-4);
  EXPECT_LT(b.bench.cell_soc(), 0.5);
  ASSERT_OK(b.load.SetInput(false));
  EXPECT_FALSE(b.bench.load_input_on());
}

TEST(SimBench, ConstantPowerSolvesTheQuadratic) {
  Bench b;
  ASSERT_OK(b.load.SetLevel(LoadMode::kPower, 2.0));
  ASSERT_OK(b.load.SetInput(true));
  auto v = b.meter.MeasureVoltage();
  auto i = b.load.MeasureCurrent();
  ASSERT_TRUE(v.ok() && i.ok());
  EXPECT_NEAR(*v * *i, 2.0, 1e-4);
}

TEST(SimBench, UnknownCommandsLandInTheErrorQueue) {
  Bench b;
  ASSERT_OK(b.load_s.Write("FROB 1"));
  ASSERT_OK(b.load_s.Write("CURR banana"));
  Status st = b.load_s.DrainErrors();
  EXPECT_EQ(st.code(), StatusCode::kInstrumentError);
  EXPECT_NE(st.message().find("-113,\"Undefined header\""), std::string::npos) << st.message();
  EXPECT_NE(st.message().find("-128"), std::string::npos) << st.message();
  EXPECT_OK(b.load_s.DrainErrors());  // queue now empty
}

TEST(SimBench, IdentifiesAsIeee4882Requires) {
  Bench b;
  auto idn = b.load_s.Identify();
  ASSERT_TRUE(idn.ok());
  // *IDN? replies maker,model,serial,firmware (IEEE 488.2 §10.14).
  EXPECT_EQ(std::count(idn->begin(), idn->end(), ','), 3);
  EXPECT_OK(b.load_s.WaitComplete());
}

TEST(ScpiSession, RetriesDroppedAndGarbledReplies) {
  VirtualClock clock;
  sim::SimBench bench(sim::DemoLiIonCell(), clock);
  testing::FaultyDevice faulty(bench.meter());
  faulty.drop_every = 2;
  ScpiSession s(std::make_unique<InProcTransport>(faulty, clock), clock);
  for (int i = 0; i < 6; ++i) EXPECT_TRUE(s.QueryNumber("MEAS:VOLT?").ok());
  EXPECT_GT(s.retry_count(), 0);
  faulty.drop_every = 0;
  faulty.garble_every = 3;
  for (int i = 0; i < 6; ++i) EXPECT_TRUE(s.QueryNumber("MEAS:VOLT?").ok());
}

TEST(ScpiSession, SilentInstrumentTimesOutOnTheClock) {
  VirtualClock clock;
  sim::SimBench bench(sim::DemoLiIonCell(), clock);
  testing::FaultyDevice faulty(bench.meter());
  faulty.silent_after = 0;
  ScpiOptions o;
  o.timeout = Seconds(2.0);
  o.retries = 2;
  ScpiSession s(std::make_unique<InProcTransport>(faulty, clock), clock, o);
  auto r = s.Query("MEAS:VOLT?");
  EXPECT_EQ(r.status().code(), StatusCode::kTimeout);
  EXPECT_NEAR(clock.Now().count(), 6.0, 1e-9);  // three attempts of 2 s each
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

// SCPI-99 6.2.3 / 7.4 (from memory): several program message units in one
// line separated by ';', a unit without a leading ':' continuing the previous
// header's path, the responses joined by ';' - as PyVISA users send them.
TEST(SimBenchCompound, CompoundMessagesAreAnsweredInOneResponse) {
  VirtualClock clock;
  sim::SimBench bench(sim::DemoLiIonCell(2.5), clock);
  LineDevice& load = bench.load();
  auto both = load.HandleLine("MEAS:VOLT?;:MEAS:CURR?");
  ASSERT_TRUE(both.has_value());
  ASSERT_NE(both->find(';'), std::string::npos) << *both;
  auto v = ParseScpiNumber(both->substr(0, both->find(';')));
  auto i = ParseScpiNumber(both->substr(both->find(';') + 1));
  ASSERT_TRUE(v.ok() && i.ok()) << *both;
  EXPECT_GT(v->value, 3.0);
  EXPECT_EQ(i->value, 0.0);
  EXPECT_EQ(load.HandleLine("*CLS;*OPC?").value_or(""), "1");
  // Relative headers: SOUR:CURR 0.75 then CURR? in the same SOURce path.
  EXPECT_EQ(load.HandleLine("SOUR:CURR 0.75;CURR?").value_or(""), FormatNr3(0.75));
  EXPECT_FALSE(load.HandleLine("FUNC CURR;:CURR 0.5;:INP ON").has_value());
  EXPECT_TRUE(bench.load_input_on());
  EXPECT_EQ(load.HandleLine("INP?;:CURR?;:SYST:ERR?").value_or(""), "1;" + FormatNr3(0.5) + ";0,\"No error\"");
  EXPECT_FALSE(load.HandleLine("INP OFF").has_value());
}

}  // namespace
}  // namespace kp
