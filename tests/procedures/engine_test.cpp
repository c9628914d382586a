// StepEngine driven by synthetic readings (no instruments): every step kind,
// loops, segment timing and snapshot/restore.
#include "procedures/engine.h"

#include <gtest/gtest.h>

#include <cmath>

#include "procedures/procedure_parser.h"

namespace kp {
namespace {

const char* kCell = "cell li-ion rated=2000mAh nominal=3.6V max=4.2V cutoff=3.0V max-temp=60degC\n";

Plan Compile(const std::string& body) {
  auto p = ParseProcedure(std::string(kCell) + body, "t");
  EXPECT_TRUE(p.ok()) << FormatDiagnostics("t", p.errors);
  return p.plan;
}

// A toy cell for the engine's point of view: open-circuit voltage falls
// linearly with charge drawn, 50 mOhm series resistance; a supply in CV holds
// the voltage and its current decays with a 600 s time constant.
struct ToyCell {
  double charge_mah = 0;
  Setpoint sp;
  double cv_started_s = -1;
  double Ocv() const { return 4.1 - 1.2 * charge_mah / 2000.0; }
  double Current(double t) {
    if (sp.supply_on) {
      if (Ocv() + 0.05 * sp.supply_a < sp.supply_v) return -sp.supply_a;
      if (cv_started_s < 0) cv_started_s = t;
      return -sp.supply_a * std::exp(-(t - cv_started_s) / 600.0);
    }
    if (!sp.load_on) return 0;
    if (sp.mode == LoadMode::kCurrent) return sp.level;
    if (sp.mode == LoadMode::kResistance) return Ocv() / (sp.level + 0.05);
    return sp.level / Ocv();
  }
};

struct Driver {
  const Plan& plan;
  StepEngine engine;
  ToyCell cell;
  std::vector<Reading> readings;
  std::vector<StepChange> changes;
  std::vector<StepResult> results;
  std::vector<std::pair<double, Setpoint>> setpoints;
  double last_t = 0;
  explicit Driver(const Plan& p) : plan(p), engine(p) {}
  void Apply(const EngineOutput& out, double t) {
    for (const auto& c : out.changes) changes.push_back(c);
    for (const auto& r : out.results) results.push_back(r);
    if (out.setpoint) {
      cell.sp = *out.setpoint;
      setpoints.push_back({t, *out.setpoint});
    }
  }
  Reading Read(double t) {
    double i = cell.Current(t);
    return Reading{t, cell.Ocv() - 0.05 * i, i, 25.0};
  }
  void Run(double until_s = 1e7) {
    Apply(engine.Start(0, Read(0)), 0);
    while (!engine.finished() && last_t < until_s) {
      double t = engine.NextWakeup();
      ASSERT_GT(t, last_t);
      cell.charge_mah += cell.Current(last_t) * (t - last_t) / 3.6;  // held since the last setpoint
      last_t = t;
      Reading r = Read(t);
      readings.push_back(r);
      Apply(engine.OnReading(r), t);
    }
  }
};

TEST(EngineSteps, ConstantPowerAndResistanceReachTheirEnds) {
  Plan p = Compile("discharge 2W until voltage<=3.5V\ndischarge 4Ohm until time>=10min\n");
  Driver d(p);
  d.Run();
  ASSERT_EQ(d.changes.size(), 3u);
  EXPECT_NE(d.changes[1].reason.find("voltage"), std::string::npos);
  EXPECT_NE(d.changes[2].reason.find("time 600.0 s"), std::string::npos) << d.changes[2].reason;
  EXPECT_EQ(d.setpoints[0].second.mode, LoadMode::kPower);
  EXPECT_DOUBLE_EQ(d.setpoints[0].second.level, 2.0);
  EXPECT_EQ(d.setpoints[1].second.mode, LoadMode::kResistance);
  EXPECT_FALSE(d.setpoints.back().second.load_on);
}

TEST(EngineSteps, ChargeIsConstantCurrentThenConstantVoltageUntilTaper) {
  Plan p = Compile("discharge 1A until charge>=500mAh\ncharge 0.5C to 4.1V until current<=40mA or time>=5h every=10s\n");
  Driver d(p);
  d.Run();
  ASSERT_EQ(d.changes.size(), 3u);
  EXPECT_NE(d.changes[2].reason.find("current 0.0"), std::string::npos) << d.changes[2].reason;
  const Setpoint& charge = d.setpoints[1].second;
  EXPECT_TRUE(charge.supply_on);
  EXPECT_FALSE(charge.load_on);  // never load and charge together
  EXPECT_DOUBLE_EQ(charge.supply_v, 4.1);
  EXPECT_DOUBLE_EQ(charge.supply_a, 1.0);
  EXPECT_FALSE(d.setpoints.back().second.supply_on);
  // The charge step put back at least most of what the discharge took (the toy
  // cell's taper is not tied to its charge, so no closer figure is claimed).
  EXPECT_LT(d.cell.charge_mah, 100.0);
}

TEST(EngineSteps, PulseEdgesAreSampledOnBothSides) {
  Plan p = Compile("pulse 2A/10s 0.5A/30s until time>=120s every=4s\n");
  Driver d(p);
  d.Run();
  // Setpoints change exactly at k * 40 s and k * 40 + 10 s.
  std::vector<double> edges;
  for (size_t i = 1; i < d.setpoints.size(); ++i) edges.push_back(d.setpoints[i].first);
  std::vector<double> want = {10, 40, 50, 80, 90, 120};
  ASSERT_EQ(edges.size(), want.size());
  for (size_t i = 0; i < want.size(); ++i) EXPECT_NEAR(edges[i], want[i], 1e-9);
  // A reading exactly at each edge (old level) and one edge_settle_s after it (new level).
  for (double e : {10.0, 40.0, 50.0, 80.0, 90.0}) {
    bool at = false, after = false;
    for (const Reading& r : d.readings) {
      at = at || std::abs(r.t_s - e) < 1e-9;
      after = after || std::abs(r.t_s - (e + p.edge_settle_s)) < 1e-9;
    }
    EXPECT_TRUE(at && after) << "edge " << e;
  }
  // Gaps never exceed the sample period.
  for (size_t i = 1; i < d.readings.size(); ++i) EXPECT_LE(d.readings[i].t_s - d.readings[i - 1].t_s, 4.0 + 1e-9);
}

TEST(EngineSteps, ResistanceTestUsesReadingsAtTheEndOfEachCurrent) {
  Plan p = Compile("dcir 0.2C/10s 1C/1s every=1s\n");
  Driver d(p);
  d.Run();
  ASSERT_EQ(d.results.size(), 1u);
  const StepResult& r = d.results[0];
  EXPECT_DOUBLE_EQ(r.t1_s, 10.0);
  EXPECT_DOUBLE_EQ(r.t2_s, 11.0);
  EXPECT_DOUBLE_EQ(r.i1_a, 0.4);
  EXPECT_DOUBLE_EQ(r.i2_a, 2.0);
  // IEC 61960-3 clause 7.7: R = (U1 - U2) / (I2 - I1), from the readings themselves.
  EXPECT_DOUBLE_EQ(r.value, (r.u1_v - r.u2_v) / (r.i2_a - r.i1_a));
  // The toy cell's series resistance plus the open-circuit drop over 1 s.
  EXPECT_NEAR(r.value, 0.05, 0.005);
}

TEST(EngineLoops, RepeatCountAndNestedUntil) {
  Plan p =
      Compile("repeat 3\n  rest 10s\n  repeat until charge>=29mAh\n    discharge 3.6A until time>=10s\n  end\nend\nrest 1s\n");
  Driver d(p);
  d.Run();
  int rests = 0, discharges = 0;
  for (const StepChange& c : d.changes) {
    if (c.started_step == 0) ++rests;
    if (c.started_step == 1) ++discharges;
  }
  EXPECT_EQ(rests, 3);
  // 3.6 A gives 10 mAh per 10 s pass (a little less on the first, whose
  // first interval starts from the rest's 0 A reading): three passes reach 29 mAh.
  EXPECT_EQ(discharges, 9);
  EXPECT_NE(d.changes.back().reason.find("time"), std::string::npos);
}

TEST(EngineLoops, RepeatUntilVoltageEndsTheLoopMidStep) {
  Plan p = Compile("repeat until voltage<=3.5V\n  discharge 2A until charge>=200mAh\n  rest 5min\nend\nrest 1min\n");
  Driver d(p);
  d.Run();
  ASSERT_TRUE(d.engine.finished());
  bool loop_end = false;
  for (const StepChange& c : d.changes)
    loop_end = loop_end || c.reason.find("repeat (line 2) done: voltage") != std::string::npos;
  EXPECT_TRUE(loop_end);
  // OCV falls 1.2 V over 2000 mAh from 4.1 V; under 2 A it reads 0.1 V lower,
  // so 3.5 V is reached at OCV 3.6 V, i.e. 833.3 mAh (within one 1 s sample, 0.56 mAh).
  EXPECT_NEAR(d.cell.charge_mah, 833.3, 1.0);
}

TEST(EngineSnapshot, RestoreKeepsLoopCountersAndPulsePhase) {
  Plan p = Compile("repeat 4\n  pulse 1A/3s 0A/7s until time>=30s every=1s\nend\n");
  Driver a(p);
  a.Run(/*until_s=*/45.5);  // second pass (starts at 30 s), second cycle, low phase
  ASSERT_GT(a.last_t, 43.0);
  ASSERT_LT(a.last_t, 50.0);
  std::string snap = a.engine.Snapshot(a.last_t);
  StepEngine b(p);
  auto out = b.Restore(snap, 1000.0);
  ASSERT_TRUE(out.ok()) << out.status().ToString();
  ASSERT_TRUE(out->setpoint.has_value());
  EXPECT_DOUBLE_EQ(out->setpoint->level, 0.0);  // low phase continues
  EXPECT_EQ(b.loop_iteration(0), 1);
  // The next edge: 20 s into the pass (run time 50 s before the gap).
  double next_edge = 0;
  for (double t = b.NextWakeup(); t < 1100; t = b.NextWakeup()) {
    auto o = b.OnReading({t, 3.9, 0.0, 25});
    if (o.setpoint && o.setpoint->level == 1.0) {
      next_edge = t;
      break;
    }
  }
  EXPECT_NEAR(next_edge, 1000.0 + (50.0 - a.last_t), 1e-6);
  // Finishing from there takes the rest of this pass and two more 30 s passes.
  int passes_left = 0;
  double t = next_edge;
  while (!b.finished() && t < 2000) {
    t = b.NextWakeup();
    auto o = b.OnReading({t, 3.9, 0.0, 25});
    for (const auto& c : o.changes) passes_left += c.started_step == 0 ? 1 : 0;
  }
  EXPECT_EQ(passes_left, 2);
  EXPECT_NEAR(t, 1000.0 + (60.0 - a.last_t) + 60.0, 1e-6);
}

TEST(EngineSnapshot, HalfDoneResistanceTestResumes) {
  Plan p = Compile("dcir 1A/10s 2A/2s every=1s\n");
  Driver a(p);
  a.Run(10.5);  // U1 taken at 10 s, now in the second current
  std::string snap = a.engine.Snapshot(a.last_t);
  EXPECT_NE(snap.find("u1="), std::string::npos) << snap;
  StepEngine b(p);
  auto out = b.Restore(snap, 100.0);
  ASSERT_TRUE(out.ok());
  EXPECT_DOUBLE_EQ(out->setpoint->level, 2.0);
  std::vector<StepResult> results;
  while (!b.finished()) {
    double t = b.NextWakeup();
    auto o = b.OnReading({t, 3.8, 2.0, 25});
    for (auto& r : o.results) results.push_back(r);
  }
  ASSERT_EQ(results.size(), 1u);
  EXPECT_DOUBLE_EQ(results[0].i1_a, 1.0);
  EXPECT_NEAR(results[0].t2_s - results[0].t1_s, 2.0, 1e-9);
  EXPECT_FALSE(b.Restore("v2 step=x", 0).ok());
  EXPECT_FALSE(b.Restore("v2 step=9 elapsed=0 charge=0 energy=0", 0).ok());
}

}  // namespace
}  // namespace kp
