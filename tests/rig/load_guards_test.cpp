// Load guards armed at the start of a run from the procedure's limits
// (rig/load_guards.h), checked on the in-process simulator.
#include "rig/load_guards.h"

#include <gtest/gtest.h>

#include <memory>

#include "drivers/inproc_transport.h"
#include "procedures/procedure_parser.h"
#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

Plan Compile(const std::string& text) {
  auto p = CompileProcedure(text, "guards.kpp");
  EXPECT_TRUE(p.ok()) << p.status().ToString();
  return p.ok() ? *p : Plan{};
}

double SettingOf(const std::vector<GuardSetting>& s, LoadGuard g) {
  for (const GuardSetting& x : s)
    if (x.guard == g && x.value) return *x.value;
  return -1.0;
}

TEST(LoadGuards, UnderVoltageSitsBelowTheMinVoltageAndEveryCutoff) {
  Plan p = Compile(
      "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V\n"
      "safety min-voltage=2.6V max-current=3A max-voltage=4.3V\n"
      "discharge 2A until voltage<=3.0V every=30s\n"
      "discharge 0.5A until voltage<=2.75V\n");
  auto s = GuardSettingsFor(p);
  double uv = SettingOf(s, LoadGuard::kUnderVoltage);
  EXPECT_NEAR(uv, 2.6 - kLoadGuardMarginV, 1e-9);
  EXPECT_LT(uv, p.limits.min_voltage_v);
  for (const Step& st : p.steps) EXPECT_LT(uv, *st.end.voltage_below_v);
  EXPECT_NEAR(SettingOf(s, LoadGuard::kOverCurrent), 3.0 * kLoadGuardHeadroom, 1e-9);
  EXPECT_NEAR(SettingOf(s, LoadGuard::kOverPower), 3.0 * 4.3 * kLoadGuardHeadroom, 1e-9);
  // 4 periods of the slowest step (30 s) beat the 60 s floor.
  EXPECT_NEAR(SettingOf(s, LoadGuard::kWatchdog), 120.0, 1e-9);
}

TEST(LoadGuards, APlanWithoutMinVoltageStillStaysBelowItsCutoffs) {
  Plan p;
  p.limits.min_voltage_v = 0.0;
  Step st;
  st.kind = StepKind::kConstantCurrent;
  st.current_a = 1.0;
  st.end.voltage_below_v = 3.0;
  p.steps.push_back(st);
  EXPECT_NEAR(SettingOf(GuardSettingsFor(p), LoadGuard::kUnderVoltage), 3.0 - kLoadGuardMarginV, 1e-9);
  EXPECT_NEAR(SettingOf(GuardSettingsFor(p), LoadGuard::kWatchdog), kWatchdogMinS, 1e-9);
  EXPECT_LT(SettingOf(GuardSettingsFor(p, 0.0), LoadGuard::kWatchdog), 0.0) << "0: no watchdog";
  p.steps[0].end.voltage_below_v.reset();
  auto s = GuardSettingsFor(p);
  EXPECT_LT(SettingOf(s, LoadGuard::kUnderVoltage), 0.0) << "nothing to set it from";
  EXPECT_FALSE(s[0].why_unset.empty());
}

TEST(LoadGuards, ArmedOnTheSimulatedLoadAndReadBack) {
  VirtualClock clock;
  SimRig rig(clock, sim::DemoLiIonCell(2.56));
  Plan p = RatedCapacityPlan(testing::Cell2500());
  // In this process the simulated load needs no watchdog: not armed, and said so.
  GuardReport in_process = ArmLoadGuards(*rig.roles().load, p);
  ASSERT_EQ(in_process.armed.size(), 4u);
  EXPECT_EQ(in_process.armed[3], "watchdog not used: the simulated load lives in this process");
  EXPECT_DOUBLE_EQ(*rig.roles().load->ReadGuard(LoadGuard::kWatchdog), 0.0);
  // Over a link (a rig file at clock_speed 20): 60 wall seconds are 1200 of the simulator's.
  rig.roles().load->EnableWatchdog(20.0);
  GuardReport rep = ArmLoadGuards(*rig.roles().load, p);
  EXPECT_EQ(rep.failure, "");
  EXPECT_EQ(rep.missing.size(), 0u);
  ASSERT_EQ(rep.armed.size(), 4u);
  EXPECT_EQ(rep.armed[0].rfind("undervoltage 2.400 V", 0), 0u) << rep.armed[0];
  EXPECT_NEAR(*rig.roles().load->ReadGuard(LoadGuard::kWatchdog), kWatchdogMinS * 20.0, 1e-6);
  EXPECT_NEAR(*rig.roles().load->ReadGuard(LoadGuard::kUnderVoltage), p.limits.min_voltage_v - kLoadGuardMarginV, 1e-6);
  EXPECT_EQ(MissingGuardsWarning(*rig.roles().load), "");
}

// A load that quietly keeps another over-current setting than the one sent.
class StubbornLoad final : public LineDevice {
 public:
  explicit StubbornLoad(LineDevice& inner) : inner_(inner) {}
  std::optional<std::string> HandleLine(std::string_view line) override {
    if (line == "CURR:PROT?") return std::string("+9.00000E+00");
    return inner_.HandleLine(line);
  }

 private:
  LineDevice& inner_;
};

TEST(LoadGuards, AGuardThatDoesNotReadBackStopsTheRunBeforeTheLoadComesOn) {
  testing::StoreFixture f;
  SimRig sim(f.clock, sim::DemoLiIonCell(2.56));
  StubbornLoad stubborn(sim.bench().load());
  ScpiSession session(std::make_unique<InProcTransport>(stubborn, f.clock), f.clock);
  LoadDriver load(session);
  RigRoles roles = sim.roles();
  roles.load = &load;
  RunController rc(*f.store, f.clock, roles);
  RunOptions o;
  o.cell_name = "stubborn";
  auto r = rc.Execute(RatedCapacityPlan(testing::Cell2500()), o);
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->outcome, Outcome::kAborted);
  EXPECT_NE(r->reason.find("overcurrent protection reads back 9.000 A, not the"), std::string::npos) << r->reason;
  EXPECT_EQ(f.Samples(r->run_id).size(), 0u) << "nothing may run on an unverified guard";
  EXPECT_FALSE(sim.bench().load_input_on());
}

TEST(LoadGuards, MissingGuardsAreWarnedAndRecordedOnTheRun) {
  testing::StoreFixture f;
  SimRig sim(f.clock, sim::DemoLiIonCell(2.56));
  LoadCommands cmds;
  cmds.watchdog_backstop.clear();
  cmds.over_power_backstop.clear();
  LoadDriver load(sim.load_session(), cmds);
  EXPECT_NE(MissingGuardsWarning(load).find("no hardware overpower, watchdog protection"), std::string::npos)
      << MissingGuardsWarning(load);
  RigRoles roles = sim.roles();
  roles.load = &load;
  RunController rc(*f.store, f.clock, roles);
  RunOptions o;
  o.cell_name = "unguarded";
  Plan p = RatedCapacityPlan(testing::Cell2500());
  p.steps.back().end.time_s = 600.0;
  auto r = rc.Execute(p, o);
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->outcome, Outcome::kCompleted) << r->reason;
  std::string warnings, guards;
  auto events = f.store->LoadEvents(r->run_id);
  ASSERT_TRUE(events.ok());
  for (const EventRow& e : *events) {
    if (e.kind == "warning") warnings += e.message + "\n";
    if (e.kind == "guard") guards += e.message + "\n";
  }
  EXPECT_NE(warnings.find("no overpower protection"), std::string::npos) << warnings;
  EXPECT_NE(warnings.find("no watchdog protection"), std::string::npos) << warnings;
  EXPECT_NE(guards.find("undervoltage 2.400 V"), std::string::npos) << guards;
  EXPECT_NE(guards.find("overcurrent"), std::string::npos) << guards;
  EXPECT_EQ(guards.find("watchdog"), std::string::npos) << guards;
}

}  // namespace
}  // namespace kp
