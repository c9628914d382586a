// The chamber steps of the procedure language: `chamber TEMP` and
// `soak within= for= max=`, accepted and rejected forms, what they compile to,
// and the rig checks (no chamber, set point outside the chamber's range).
#include <gtest/gtest.h>

#include <string>

#include "procedures/engine.h"
#include "procedures/estimate.h"
#include "procedures/procedure_parser.h"

namespace kp {
namespace {

const std::string kHead = "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n";

std::string Errors(const ParseOutput& p) { return FormatDiagnostics("t", p.errors); }

TEST(ChamberSteps, AcceptedForms) {
  struct Case {
    const char* body;
    double set_c;
    double band_c, hold_s, max_s;  // of the last step when it is a soak
  };
  const Case cases[] = {
      {"chamber 40degC\n", 40.0, 0, 0, 0},
      {"chamber -10degC every=5s\n", -10.0, 0, 0, 0},
      {"chamber 45 °C\n", 45.0, 0, 0, 0},
      {"chamber 40degC\nsoak within=0.5degC for=30min max=3h\n", 40.0, 0.5, 1800.0, 10800.0},
      {"chamber 40degC\nsoak max=2h every=10s for=10min within=1degC\n", 40.0, 1.0, 600.0, 7200.0},
      {"chamber 5degC\nrest 1min\nsoak within=0.2degc for=1h30min max=6h\n", 5.0, 0.2, 5400.0, 21600.0},
      {"safety chamber-min=-20degC chamber-max=60degC\nchamber 60degC\nsoak within=1degC for=5min max=1h\n", 60.0, 1.0, 300.0, 3600.0},
  };
  for (const Case& c : cases) {
    SCOPED_TRACE(c.body);
    ParseOutput p = ParseProcedure(kHead + c.body + "discharge 0.2It until voltage<=2.75V\n", "t");
    ASSERT_TRUE(p.ok()) << Errors(p);
    const Step& first = p.plan.steps.front();
    EXPECT_EQ(first.kind, StepKind::kChamberSet);
    EXPECT_DOUBLE_EQ(first.chamber_c, c.set_c);
    EXPECT_FALSE(first.end.any());
    const Step& soak = p.plan.steps[p.plan.steps.size() - 2];
    if (c.band_c > 0) {
      ASSERT_EQ(soak.kind, StepKind::kChamberSoak);
      EXPECT_DOUBLE_EQ(soak.chamber_c, c.set_c);  // the set point of the chamber step above
      EXPECT_DOUBLE_EQ(soak.soak_band_c, c.band_c);
      EXPECT_DOUBLE_EQ(soak.soak_hold_s, c.hold_s);
      EXPECT_DOUBLE_EQ(soak.soak_max_s, c.max_s);
    }
    // The load is never on in a chamber step; the records name them.
    EXPECT_STREQ(StepModeName(first), "chamber");
    EXPECT_EQ(StepLevel(first), c.set_c);
    EXPECT_FALSE(IsDischargeKind(first.kind));
    EXPECT_TRUE(PlanUsesChamber(p.plan));
  }
}

TEST(ChamberSteps, RejectedFormsSayWhatAndWhere) {
  struct Case {
    const char* body;  // after the cell line (line 1)
    const char* where; // "t:L:C"
    const char* says;
  };
  const Case cases[] = {
      {"chamber 40\n", "t:2:9", "no unit"},
      {"chamber 40C\n", "t:2:9", "did you mean 40degC?"},
      {"chamber 40V\n", "t:2:9", "temperature"},
      {"chamber\n", "t:2:8", "expected the chamber set point"},
      {"chamber 40degC until time>=1h\n", "t:2:16", "takes no 'until'"},
      {"soak within=0.5degC for=30min max=2h\n", "t:2:1", "needs a 'chamber' step before it"},
      {"chamber 40degC\nsoak for=30min max=2h\n", "t:3:22", "needs within="},
      {"chamber 40degC\nsoak within=0.5degC max=2h\n", "t:3:27", "needs for="},
      {"chamber 40degC\nsoak within=0.5degC for=30min\n", "t:3:30", "needs max="},
      {"chamber 40degC\nsoak within=0.5degC for=30min max=20min\n", "t:3:35", "max= must be longer than for="},
      {"chamber 40degC\nsoak within=0degC for=30min max=2h\n", "t:3:13", "greater than zero"},
      {"chamber 40degC\nsoak within=0.5degC for=30 max=2h\n", "t:3:25", "no unit"},
      {"chamber 40degC\nsoak withn=0.5degC for=30min max=2h\n", "t:3:6", "did you mean 'within'?"},
      {"chamber 40degC\nsoak within=0.5degC for=30min max=2h until time>=1h\n", "t:3:38", "takes no 'until'"},
      {"chamber 40degC\nsoke within=0.5degC for=30min max=2h\n", "t:3:1", "unknown statement 'soke': use cell, safety, sample, rest, discharge, pulse, duty/phase, play, dcir, charge, chamber, soak"},
      {"safety chamber-max=35degC\nchamber 40degC\n", "t:3:9", "above the safety chamber-max=35degC"},
      {"safety chamber-min=10degC\nchamber 5degC\n", "t:3:9", "below the safety chamber-min=10degC"},
      {"safety chamber-min=50degC chamber-max=40degC\nchamber 45degC\n", "t:2:", "chamber-min must be below chamber-max"},
      {"safety chamber-mx=40degC\nchamber 40degC\n", "t:2:8", "did you mean 'chamber-max'?"},
  };
  for (const Case& c : cases) {
    SCOPED_TRACE(c.body);
    ParseOutput p = ParseProcedure(kHead + c.body + "discharge 0.2It until voltage<=2.75V\n", "t");
    ASSERT_FALSE(p.ok());
    const std::string e = Errors(p);
    EXPECT_NE(e.find(c.where), std::string::npos) << e;
    EXPECT_NE(e.find(c.says), std::string::npos) << e;
  }
}

TEST(ChamberSteps, RigWithoutChamberOrNarrowerRangeIsRefused) {
  const std::string text = kHead + "chamber 40degC\nsoak within=0.5degC for=30min max=3h\ndischarge 0.2It until voltage<=2.75V\n";
  RigLimits none;
  none.has_chamber = false;
  ParseOutput p = ParseProcedure(text, "t", none);
  ASSERT_FALSE(p.ok());
  EXPECT_NE(Errors(p).find("t:2:1: this step needs a temperature chamber, and this rig has none"), std::string::npos) << Errors(p);
  EXPECT_NE(Errors(p).find("t:3:1: this step needs a temperature chamber"), std::string::npos) << Errors(p);

  RigLimits narrow;
  narrow.chamber_max_c = 35.0;
  ParseOutput q = ParseProcedure(text, "t", narrow);
  ASSERT_FALSE(q.ok());
  EXPECT_NE(Errors(q).find("t:2:1: chamber set point 40 degC is above the rig's chamber limit 35 degC"), std::string::npos)
      << Errors(q);

  // A rig range wider than the procedure's keeps the procedure's; a narrower one tightens it.
  RigLimits wide;
  wide.chamber_min_c = -40.0;
  wide.chamber_max_c = 150.0;
  ParseOutput w = ParseProcedure(kHead + "safety chamber-max=60degC\n" + text.substr(kHead.size()), "t", wide);
  ASSERT_TRUE(w.ok()) << Errors(w);
  EXPECT_EQ(w.plan.limits.chamber_max_c, 60.0);
  EXPECT_EQ(w.plan.limits.chamber_min_c, -40.0);
}

// The engine: a chamber step asks for the set point with the load off and
// ends at the next reading; a soak ends once the readings have stayed in
// the band for the hold time, and aborts after its maximum time.
TEST(ChamberSteps, EngineSetsThenJudgesTheSoak) {
  ParseOutput p = ParseProcedure(kHead + "chamber 40degC\nsoak within=0.5degC for=60s max=10min every=1s\nrest 1s\n", "t");
  ASSERT_TRUE(p.ok()) << Errors(p);
  StepEngine e(p.plan);
  EngineOutput o = e.Start(0.0, Reading{0.0, 3.9, 0.0, 22.0, 22.0});
  ASSERT_TRUE(o.chamber_setpoint_c.has_value());
  EXPECT_EQ(*o.chamber_setpoint_c, 40.0);
  ASSERT_TRUE(o.setpoint.has_value());
  EXPECT_FALSE(o.setpoint->load_on);
  double t = e.NextWakeup();
  EXPECT_LE(t, 0.1);
  o = e.OnReading(Reading{t, 3.9, 0.0, 22.0, 22.5});
  ASSERT_EQ(o.changes.size(), 1u);
  EXPECT_EQ(o.changes[0].started_step, 1);
  EXPECT_FALSE(o.chamber_setpoint_c.has_value());
  // 39.0 is out of the band; in it from t = 100 s; done 60 s later.
  double in_band_from = 100.0;
  double ended_at = -1;
  for (int k = 0; k < 400 && ended_at < 0; ++k) {
    t = e.NextWakeup();
    double chamber = t < in_band_from ? 39.0 : 39.7;
    o = e.OnReading(Reading{t, 3.9, 0.0, 22.0, chamber});
    ASSERT_FALSE(o.abort_reason) << *o.abort_reason;
    if (!o.changes.empty()) ended_at = t;
  }
  EXPECT_NEAR(ended_at, in_band_from + 60.0, 1.01);
  EXPECT_EQ(e.step_index(), 2);

  // Never in the band: aborts at max= after the soak began.
  StepEngine f(p.plan);
  (void)f.Start(0.0, Reading{0.0, 3.9, 0.0, 22.0, 22.0});
  (void)f.OnReading(Reading{f.NextWakeup(), 3.9, 0.0, 22.0, 22.0});
  const double soak_start = f.NextWakeup() - 1.0;
  std::optional<std::string> why;
  double aborted_at = -1;
  for (int k = 0; k < 1000 && !why; ++k) {
    t = f.NextWakeup();
    o = f.OnReading(Reading{t, 3.9, 0.0, 22.0, 30.0});
    if (o.abort_reason) why = o.abort_reason, aborted_at = t;
  }
  ASSERT_TRUE(why.has_value());
  EXPECT_NE(why->find("chamber soak failed: not stable at 40.0 degC"), std::string::npos) << *why;
  EXPECT_NEAR(aborted_at - soak_start, 600.0, 1.01);

  // A soak without a chamber reading cannot be judged: it stops the run.
  StepEngine g(p.plan);
  (void)g.Start(0.0, Reading{0.0, 3.9, 0.0, 22.0, 22.0});
  (void)g.OnReading(Reading{g.NextWakeup(), 3.9, 0.0, 22.0, 22.0});
  o = g.OnReading(Reading{g.NextWakeup(), 3.9, 0.0, 22.0, std::nullopt});
  ASSERT_TRUE(o.abort_reason.has_value());
  EXPECT_NE(o.abort_reason->find("no chamber reading"), std::string::npos);
}

TEST(ChamberSteps, EstimateCountsTheSoakAtItsMaximum) {
  ParseOutput p = ParseProcedure(kHead + "chamber 40degC\nsoak within=0.5degC for=30min max=3h\nrest 1h\n", "t");
  ASSERT_TRUE(p.ok()) << Errors(p);
  PlanEstimate est = EstimatePlan(p.plan, 1.0);
  EXPECT_NEAR(est.total_s, 3.0 * 3600 + 3600, 1e-6);
}

}  // namespace
}  // namespace kp
