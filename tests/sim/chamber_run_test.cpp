// Chamber steps run on the simulated rig in virtual time: the soak ends when
// the simulated chamber's first-order lag says it should, a soak that cannot
// settle aborts the run, chamber limits stop a runaway chamber with the load
// off, and a rig without a chamber is refused before the run starts.
#include <gtest/gtest.h>

#include <cmath>
#include <string>

#include "procedures/procedure_parser.h"
#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

using Fixture = testing::StoreFixture;

const std::string kHead = "cell li-ion rated=2560mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n";

Plan Compile(const std::string& body, SimRig& rig) {
  RigLimits limits;
  limits.chamber_min_c = rig.roles().chamber->limits().min_c;
  limits.chamber_max_c = rig.roles().chamber->limits().max_c;
  Result<Plan> p = CompileProcedure(kHead + body, "t.kpp", limits);
  EXPECT_TRUE(p.ok()) << p.status().ToString();
  return p.ok() ? *p : Plan{};
}

const StepRow* FindStep(const std::vector<StepRow>& steps, const std::string& kind) {
  for (const StepRow& s : steps)
    if (s.kind == kind) return &s;
  return nullptr;
}

// Set 40 degC, soak within ±0.5 degC for 30 min, then discharge. The
// simulated chamber follows T(t) = T_end + (T_0 − T_end)·exp(−t/tau), the
// step response of a first-order lag (textbook, from memory), so it enters
// the band at t_in = tau·ln(|T_0 − T_end| / band) after the set point and the
// soak ends 30 min later (within one soak sample period).
TEST(ChamberRun, SoakEndsWhenTheLagSaysSo) {
  Fixture f;
  sim::CellParams cell = sim::DemoLiIonCell(2.56);
  SimRig rig(f.clock, cell);
  Plan plan = Compile(
      "chamber 40degC\n"
      "soak within=0.5degC for=30min max=3h every=2s\n"
      "discharge 0.2It until voltage<=2.75V every=20s\n",
      rig);
  RunController rc(*f.store, f.clock, rig.roles());
  auto r = rc.Execute(plan, {});
  ASSERT_TRUE(r.ok()) << r.status().ToString();
  ASSERT_EQ(r->outcome, Outcome::kCompleted) << r->reason;

  Result<std::vector<StepRow>> steps = f.store->LoadSteps(r->run_id);
  ASSERT_TRUE(steps.ok());
  const StepRow* set = FindStep(*steps, "chamber set point");
  const StepRow* soak = FindStep(*steps, "chamber soak");
  ASSERT_NE(set, nullptr);
  ASSERT_NE(soak, nullptr);
  // The step records carry the new kinds, with the set point as their level.
  EXPECT_EQ(set->mode, "chamber");
  EXPECT_EQ(soak->mode, "chamber");
  ASSERT_TRUE(set->level.has_value());
  EXPECT_DOUBLE_EQ(*set->level, 40.0);
  ASSERT_TRUE(soak->ended_s.has_value());
  EXPECT_NE(soak->end_reason.find("stable at 40.0 degC"), std::string::npos) << soak->end_reason;

  const double tau_s = sim::SimChamberOptions{}.tau_s;
  const double t0_c = cell.ambient_c;  // the chamber starts at the cell's surroundings
  const double t_in = set->started_s + tau_s * std::log(std::abs(t0_c - 40.0) / 0.5);
  const double expected_end = t_in + 30 * 60.0;
  EXPECT_GE(*soak->ended_s, expected_end - 0.5);
  EXPECT_LE(*soak->ended_s, expected_end + 2 * 2.0 + 0.5);

  // The load stayed off through both chamber steps, and the cell was warmed
  // by its surroundings before the discharge began.
  for (const Sample& s : f.Samples(r->run_id)) {
    if (s.t_s < *soak->ended_s - 1e-6) {
      EXPECT_NEAR(s.current_a, 0.0, 1e-6) << "t=" << s.t_s;
    }
  }
  EXPECT_GT(rig.bench().cell_temperature_c(), 35.0);
  EXPECT_FALSE(rig.bench().load_input_on());
  // The run started the chamber, so its end stopped it, and the log says so.
  EXPECT_FALSE(rig.chamber_device().running());
  Result<std::vector<EventRow>> events = f.store->LoadEvents(r->run_id);
  ASSERT_TRUE(events.ok());
  bool said = false;
  for (const EventRow& e : *events) said = said || (e.kind == "chamber" && e.message.find("chamber stopped") != std::string::npos);
  EXPECT_TRUE(said);
}

// max= shorter than the lag needs (t_in ≈ 35 min + 30 min hold > 40 min):
// the run aborts at the soak's maximum time, and the discharge never starts.
TEST(ChamberRun, SoakThatCannotSettleAbortsWithTheLoadOff) {
  Fixture f;
  SimRig rig(f.clock, sim::DemoLiIonCell(2.56));
  Plan plan = Compile(
      "chamber 40degC\n"
      "soak within=0.5degC for=30min max=40min every=5s\n"
      "discharge 0.2It until voltage<=2.75V every=20s\n",
      rig);
  RunController rc(*f.store, f.clock, rig.roles());
  auto r = rc.Execute(plan, {});
  ASSERT_TRUE(r.ok()) << r.status().ToString();
  EXPECT_EQ(r->outcome, Outcome::kAborted);
  EXPECT_NE(r->reason.find("chamber soak failed: not stable at 40.0 degC"), std::string::npos) << r->reason;
  Result<std::vector<StepRow>> steps = f.store->LoadSteps(r->run_id);
  ASSERT_TRUE(steps.ok());
  const StepRow* soak = FindStep(*steps, "chamber soak");
  ASSERT_NE(soak, nullptr);
  ASSERT_TRUE(soak->ended_s.has_value());
  EXPECT_NEAR(*soak->ended_s - soak->started_s, 40 * 60.0, 5.0 + 0.5);
  EXPECT_EQ(FindStep(*steps, "constant-current discharge"), nullptr);
  EXPECT_FALSE(rig.bench().load_input_on());
}

// The chamber runs away during a discharge (its own controller drives it to
// 80 degC): past chamber-max + 5 degC the run aborts and the load goes off.
TEST(ChamberRun, RunawayChamberAbortsTheDischarge) {
  Fixture f;
  SimRig rig(f.clock, sim::DemoLiIonCell(2.56));
  Plan plan = Compile(
      "safety chamber-max=30degC\n"
      "chamber 25degC\n"
      "discharge 0.5A until voltage<=2.75V every=5s\n",
      rig);
  RunController rc(*f.store, f.clock, rig.roles());
  RunOptions o;
  bool poked = false;
  bool load_on_when_poked = false;
  o.on_sample = [&](const Reading& r, double) {
    if (!poked && r.t_s > 60.0) {
      poked = true;
      load_on_when_poked = rig.bench().load_input_on();
      (void)rig.chamber_device().HandleLine("TEMP:SETP 80");
    }
  };
  auto r = rc.Execute(plan, o);
  ASSERT_TRUE(r.ok()) << r.status().ToString();
  EXPECT_TRUE(load_on_when_poked);
  EXPECT_EQ(r->outcome, Outcome::kAborted);
  EXPECT_NE(r->reason.find("safety limit:"), std::string::npos) << r->reason;
  EXPECT_NE(r->reason.find("more than 5.0 degC above its limit 30.0 degC"), std::string::npos) << r->reason;
  EXPECT_FALSE(rig.bench().load_input_on());
  // It stopped soon after the chamber passed 35 degC, not at the end of the discharge.
  EXPECT_LT(rig.chamber_device().temperature_c(), 40.0);
  // An abort stops the chamber too.
  EXPECT_FALSE(rig.chamber_device().running());
}

TEST(ChamberRun, SetPointOutsideTheRunLimitsIsRefused) {
  Fixture f;
  SimRig rig(f.clock, sim::DemoLiIonCell(2.56));
  // Built in code, past the parser's check: the run itself refuses to send it.
  Plan plan = Compile("chamber 25degC\nrest 1min\n", rig);
  plan.steps[0].chamber_c = 70.0;
  plan.limits.chamber_max_c = 60.0;
  RunController rc(*f.store, f.clock, rig.roles());
  auto r = rc.Execute(plan, {});
  ASSERT_TRUE(r.ok()) << r.status().ToString();
  EXPECT_EQ(r->outcome, Outcome::kAborted);
  EXPECT_NE(r->reason.find("chamber set point 70.0 degC is above the limit 60.0 degC"), std::string::npos) << r->reason;
  EXPECT_FALSE(rig.chamber_device().running());
  EXPECT_FALSE(rig.bench().load_input_on());
}

TEST(ChamberRun, RigWithoutChamberIsRefusedBeforeTheRun) {
  Fixture f;
  SimRig rig(f.clock, sim::DemoLiIonCell(2.56));
  Plan plan = Compile("chamber 40degC\nsoak within=0.5degC for=30min max=3h\nrest 1min\n", rig);
  RigRoles roles = rig.roles();
  roles.chamber = nullptr;
  RunController rc(*f.store, f.clock, roles);
  auto r = rc.Execute(plan, {});
  ASSERT_FALSE(r.ok());
  EXPECT_NE(r.status().message().find("the rig has no chamber"), std::string::npos) << r.status().ToString();
  EXPECT_FALSE(rig.chamber_device().running());
}

}  // namespace
}  // namespace kp
