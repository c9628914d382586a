// The simulated rig as a whole: the cell keeps its state between runs, and
// the simulated DC supply charges it constant-current then constant-voltage.
#include "rig/sim_rig.h"

#include <cstdio>

#include <gtest/gtest.h>

#include "analysis/metrics.h"
#include "drivers/sim/cell_file.h"
#include "rig/run_controller.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

using testing::Cell2500;

using Fixture = testing::StoreFixture;

// A second run on the same SimRig continues from the charge, wells and
// temperature the first one left; the two together deliver what one
// uninterrupted discharge does (charge conservation, Q = I·t).
TEST(SimRig, SecondRunContinuesFromTheFirst) {
  Fixture f;
  double single_mah = 0;
  {
    SimRig fresh(f.clock, sim::DemoLiIonCell(2.56));
    RunController rc(*f.store, f.clock, fresh.roles());
    auto r = rc.Execute(RatedCapacityPlan(Cell2500()), {});
    ASSERT_TRUE(r.ok());
    ASSERT_EQ(r->outcome, Outcome::kCompleted) << r->reason;
    single_mah = DeliveredChargeMah(f.Samples(r->run_id));
  }
  SimRig rig(f.clock, sim::DemoLiIonCell(2.56));
  RunController rc(*f.store, f.clock, rig.roles());
  Plan first = RatedCapacityPlan(Cell2500());
  first.limits.max_total_s = 3600;
  auto r1 = rc.Execute(first, {});
  ASSERT_TRUE(r1.ok());
  EXPECT_EQ(r1->outcome, Outcome::kAborted);  // time limit: the cell is part-used
  std::vector<Sample> s1 = f.Samples(r1->run_id);
  const double soc_after_first = rig.bench().cell_soc();
  const double temp_after_first = rig.bench().cell_temperature_c();
  EXPECT_NEAR(soc_after_first, 1.0 - 0.5 * 3600 / 3.6 / 2560.0, 2e-3);

  auto r2 = rc.Execute(RatedCapacityPlan(Cell2500()), {});
  ASSERT_TRUE(r2.ok());
  EXPECT_EQ(r2->outcome, Outcome::kCompleted) << r2->reason;
  std::vector<Sample> s2 = f.Samples(r2->run_id);
  ASSERT_FALSE(s1.empty());
  ASSERT_FALSE(s2.empty());
  EXPECT_LT(s2.front().voltage_v, s1.front().voltage_v - 0.05);
  EXPECT_NEAR(s2.front().temperature_c, temp_after_first, 0.05);
  double both = DeliveredChargeMah(s1) + DeliveredChargeMah(s2);
  EXPECT_NEAR(both, single_mah, 0.01 * single_mah);
  EXPECT_FALSE(rig.bench().load_input_on());
  EXPECT_FALSE(rig.bench().supply_output_on());
}

// CC-CV charging (common practice for Li-ion, no source in the shared
// references: constant current up to the charge voltage, then that voltage
// held while the current tapers): the simulated supply driven through its
// role driver and SCPI text.
TEST(SimRig, SupplyChargesConstantCurrentThenTapers) {
  VirtualClock clock;
  sim::CellParams cell = sim::DemoLiIonCell(2.56);
  cell.initial_soc = 0.2;
  SimRig rig(clock, cell);
  SupplyDriver* supply = rig.roles().supply;
  ASSERT_NE(supply, nullptr);
  ASSERT_OK(supply->SetVoltage(4.2));
  ASSERT_OK(supply->SetCurrentLimit(1.25));
  ASSERT_OK(supply->SetOutput(true));
  ASSERT_OK(rig.supply_session().DrainErrors());

  double cc_end_s = -1, prev_i = 1e9, charge_as = 0, prev_t = 0;
  bool tapering_monotonic = true;
  double t = 0, i = 0, v = 0;
  for (; t < 8 * 3600; t += 10) {
    clock.Advance(Seconds(10));
    auto ri = supply->MeasureCurrent();
    auto rv = supply->MeasureVoltage();
    ASSERT_TRUE(ri.ok() && rv.ok());
    charge_as += 0.5 * (*ri + (t == 0 ? *ri : i)) * (t + 10 - prev_t);
    prev_t = t + 10;
    i = *ri, v = *rv;
    if (cc_end_s < 0) {
      if (i < 1.25 - 1e-6)
        cc_end_s = t;
      else
        EXPECT_LT(v, 4.2 + 1e-9);
    } else {
      EXPECT_NEAR(v, 4.2, 1e-6);
      if (i > prev_i + 1e-9) tapering_monotonic = false;
      if (i < 0.05) break;  // C/50 end-of-charge current
    }
    prev_i = i;
  }
  EXPECT_GT(cc_end_s, 1800);                             // a long CC phase from 20 %
  EXPECT_LT(cc_end_s, 0.8 * 1.25 * 3600 / 1.25 * 2.56);  // before 80 % of the charge went in
  EXPECT_TRUE(tapering_monotonic);
  EXPECT_LT(i, 0.05);
  double soc = rig.bench().cell_soc();
  EXPECT_GT(soc, 0.97);
  EXPECT_LE(soc, 1.0);
  // What went in is what the cell stored, apart from the charge efficiency
  // and a little self-discharge.
  EXPECT_NEAR(charge_as * cell.charge_efficiency / 3600.0, (soc - 0.2) * 2.56, 0.01 * 2.56);
  ASSERT_OK(supply->SetOutput(false));
  EXPECT_FALSE(rig.bench().supply_output_on());
}

// One cell through a cycle on one rig: discharged by a run, recharged CC-CV by
// the supply, rested, and discharged again; the second run finds the charge
// the supply put back (less what the taper left out and the efficiency lost).
TEST(SimRig, DischargeRechargeDischargeOnOneCell) {
  Fixture f;
  SimRig rig(f.clock, sim::DemoLiIonCell(2.56));
  RunController rc(*f.store, f.clock, rig.roles());
  auto r1 = rc.Execute(RatedCapacityPlan(Cell2500()), {});
  ASSERT_TRUE(r1.ok());
  ASSERT_EQ(r1->outcome, Outcome::kCompleted) << r1->reason;
  const double first_mah = DeliveredChargeMah(f.Samples(r1->run_id));
  EXPECT_LT(rig.bench().cell_soc(), 0.03);

  SupplyDriver& supply = *rig.roles().supply;
  ASSERT_OK(supply.SetVoltage(4.2));
  ASSERT_OK(supply.SetCurrentLimit(1.25));
  ASSERT_OK(supply.SetOutput(true));
  for (int t = 0; t < 6 * 3600; t += 60) {
    f.clock.Advance(Seconds(60));
    auto i = supply.MeasureCurrent();
    ASSERT_TRUE(i.ok());
    if (*i < 0.05) break;
  }
  ASSERT_OK(supply.SetOutput(false));
  f.clock.Advance(Seconds(3600));  // rest

  auto r2 = rc.Execute(RatedCapacityPlan(Cell2500()), {});
  ASSERT_TRUE(r2.ok());
  ASSERT_EQ(r2->outcome, Outcome::kCompleted) << r2->reason;
  const double second_mah = DeliveredChargeMah(f.Samples(r2->run_id));
  EXPECT_NEAR(second_mah, first_mah, 0.03 * first_mah);
  std::printf("first %.1f mAh, after CC-CV recharge %.1f mAh\n", first_mah, second_mah);
  EXPECT_LT(second_mah, first_mah);  // the charge stopped at C/50, short of full
}

// Load and supply both connected: the cell current is their difference.
TEST(SimRig, LoadAndSupplyShareTheCell) {
  VirtualClock clock;
  sim::CellParams cell = sim::DemoLiIonCell(2.56);
  cell.initial_soc = 0.5;
  SimRig rig(clock, cell);
  RigRoles roles = rig.roles();
  ASSERT_OK(roles.load->SetLevel(LoadMode::kCurrent, 0.5));
  ASSERT_OK(roles.load->SetInput(true));
  ASSERT_OK(roles.supply->SetVoltage(3.8));  // a little above the OCV at half charge
  ASSERT_OK(roles.supply->SetCurrentLimit(5.0));
  ASSERT_OK(roles.supply->SetOutput(true));
  clock.Advance(Seconds(60));
  auto is = roles.supply->MeasureCurrent();
  auto il = roles.load->MeasureCurrent();
  auto v = roles.meter->MeasureVoltage();
  ASSERT_TRUE(is.ok() && il.ok() && v.ok());
  EXPECT_NEAR(*il, 0.5, 1e-9);
  EXPECT_NEAR(*v, 3.8, 1e-6);                                  // the supply holds the terminal in CV
  EXPECT_GT(*is, 0.5);                                         // feeding the load and charging the cell
  EXPECT_NEAR(rig.bench().cell_current_a(), *il - *is, 1e-5);  // readings carry 6 digits
  // With the supply limited below the load current, the cell makes up the rest.
  ASSERT_OK(roles.supply->SetCurrentLimit(0.2));
  EXPECT_NEAR(rig.bench().cell_current_a(), 0.3, 1e-9);
}

TEST(SimRig, SupplySpeaksScpi) {
  VirtualClock clock;
  SimRig rig(clock, sim::DemoLiIonCell());
  ScpiSession& s = rig.supply_session();
  auto idn = s.Identify();
  ASSERT_TRUE(idn.ok());
  EXPECT_EQ(std::count(idn->begin(), idn->end(), ','), 3);  // IEEE 488.2 §10.14
  ASSERT_OK(s.Write("VOLT 100"));
  ASSERT_OK(s.Write("OUTP MAYBE"));
  Status st = s.DrainErrors();
  EXPECT_NE(st.message().find("-222"), std::string::npos) << st.message();
  EXPECT_NE(st.message().find("-224"), std::string::npos) << st.message();
  ASSERT_OK(s.Write("VOLTAGE 3.9"));
  ASSERT_OK(s.Write("OUTPUT ON"));
  auto q = s.QueryNumber("VOLT?");
  ASSERT_TRUE(q.ok());
  EXPECT_DOUBLE_EQ(q->value, 3.9);
  auto on = s.Query("OUTP?");
  ASSERT_TRUE(on.ok());
  EXPECT_EQ(*on, "1");
  ASSERT_OK(s.Write("*RST"));
  EXPECT_FALSE(rig.bench().supply_output_on());
}

// A cell file's batch spread reaches the rig: two cells of one batch differ,
// the same seed twice gives the same figures.
TEST(SimRig, BatchCellsDifferRepeatably) {
  auto preset = sim::BuiltInCell("li-ion");
  ASSERT_TRUE(preset.ok());
  auto delivered = [&](uint64_t seed) {
    VirtualClock clock;
    sim::CellParams p = sim::VaryCell(preset->params, preset->spread, seed);
    sim::SimBench bench(p, clock);
    sim::CellModel m = bench.cell();
    double q = 0;
    while (m.Equivalent().emf_v - 0.5 * m.Equivalent().r_ohm > p.cutoff_v) m.Advance(10, 0.5), q += 5;
    return q / 3.6;
  };
  EXPECT_EQ(delivered(3), delivered(3));
  EXPECT_GT(std::abs(delivered(3) - delivered(4)), 1.0);
}

}  // namespace
}  // namespace kp
