#include "analysis/verdict.h"

#include <gtest/gtest.h>

#include <vector>

#include <cmath>

#include "analysis/run_analysis.h"

namespace kp {
namespace {

DischargeConditions GoodLiIon() {
  DischargeConditions d;
  d.rated_mah = 2500;
  d.delivered_mah = 2561;
  d.mean_current_a = 0.5;  // 0.2 It of 2,500 mAh
  d.max_current_deviation_a = 0.001;
  d.start_temperature_c = 21.0;
  d.min_temperature_c = 21.0;
  d.max_temperature_c = 24.0;
  d.rest_before_s = 2 * 3600.0;
  d.end_voltage_v = 2.75;
  return d;
}

// IEC 61960-3 7.3.1: 0.2 It at 20 ± 5 °C after a 1-4 h rest, pass at
// >= 100 % of rated (temperature and It from the text; rest and criterion
// from memory). Current tolerance ±1 % (from memory).
TEST(Verdict, LithiumRatedCapacityWithConditions) {
  CapacityMethod m = MethodForChemistry("li-ion");
  EXPECT_NE(m.name.find("61960-3"), std::string::npos);
  CapacityJudgement j = JudgeCapacityByMethod(m, GoodLiIon());
  EXPECT_TRUE(j.capacity_pass);
  EXPECT_TRUE(j.conditions_met);
  EXPECT_NEAR(j.percent_of_rated, 102.44, 1e-9);
  EXPECT_NE(j.text.find("all test conditions met"), std::string::npos);

  DischargeConditions warm = GoodLiIon();
  warm.start_temperature_c = 26.0;  // outside 20 ± 5 °C
  warm.rest_before_s.reset();
  warm.mean_current_a = 0.506;  // 1.2 % high
  CapacityJudgement w = JudgeCapacityByMethod(m, warm);
  EXPECT_TRUE(w.capacity_pass);
  EXPECT_FALSE(w.conditions_met);
  int unmet = 0;
  for (const ConditionCheck& c : w.conditions) unmet += c.met ? 0 : 1;
  EXPECT_EQ(unmet, 3);
  EXPECT_NE(w.text.find("temperature"), std::string::npos);
  EXPECT_NE(w.text.find("rest before discharge"), std::string::npos);
  EXPECT_NE(w.text.find("discharge current"), std::string::npos);

  DischargeConditions low = GoodLiIon();
  low.delivered_mah = 2499;
  EXPECT_FALSE(JudgeCapacityByMethod(m, low).capacity_pass);
}

// IEC 61951-2 (NiMH): 0.2 It to 1.0 V; rated means >= 5 h at 0.2 It
// (secondary / from memory).
// Only the method's own test gets a PASS or FAIL: 0.2 It constant current
// (IEC 61960-3 7.3.1). A pulse train, or a constant current at another rate,
// delivers a figure that is reported but not judged against the rating; a
// current a little off 0.2 It is still the test, with its current condition unmet.
TEST(Verdict, OnlyTheMethodsOwnDischargeIsJudged) {
  CapacityMethod m = MethodForChemistry("li-ion");
  CapacityJudgement good = JudgeCapacityByMethod(m, GoodLiIon());
  EXPECT_TRUE(good.judged);
  EXPECT_EQ(good.brief, "PASS 102.4 %");

  DischargeConditions pulsed = GoodLiIon();
  pulsed.pulsed = true;
  CapacityJudgement p = JudgeCapacityByMethod(m, pulsed);
  EXPECT_FALSE(p.judged);
  EXPECT_EQ(p.not_judged_why, "pulsed discharge");
  EXPECT_EQ(p.brief, "not judged: pulsed discharge");
  EXPECT_EQ(p.text.rfind("not judged", 0), 0u) << p.text;
  EXPECT_NEAR(p.percent_of_rated, 102.44, 1e-9);  // the figure is still there

  DischargeConditions fast = GoodLiIon();
  fast.mean_current_a = 2.5;  // 1 It
  fast.delivered_mah = 2400;
  CapacityJudgement f = JudgeCapacityByMethod(m, fast);
  EXPECT_FALSE(f.judged);
  EXPECT_EQ(f.brief, "not judged: constant current at 1.00 It");

  DischargeConditions near = GoodLiIon();
  near.mean_current_a = 0.5 * (1.0 + 0.5 * kJudgedRateWindow);  // off by half the window
  near.delivered_mah = 2400;
  CapacityJudgement n = JudgeCapacityByMethod(m, near);
  EXPECT_TRUE(n.judged);
  EXPECT_FALSE(n.capacity_pass);
  EXPECT_FALSE(n.conditions_met);  // the ±1 % current condition
  EXPECT_EQ(n.brief, "FAIL 96.0 %");

  DischargeConditions none = GoodLiIon();
  none.rated_mah = 0;
  EXPECT_FALSE(JudgeCapacityByMethod(m, none).judged);
}

TEST(Verdict, NickelMetalHydrideChecksEndVoltage) {
  CapacityMethod m = MethodForChemistry("NiMH");
  EXPECT_NE(m.name.find("61951-2"), std::string::npos);
  ASSERT_TRUE(m.end_voltage_v.has_value());
  DischargeConditions d = GoodLiIon();
  d.rated_mah = 2000;
  d.delivered_mah = 2050;
  d.mean_current_a = 0.4;
  d.end_voltage_v = 1.0;
  EXPECT_TRUE(JudgeCapacityByMethod(m, d).conditions_met);
  d.end_voltage_v = 1.15;  // stopped early
  EXPECT_FALSE(JudgeCapacityByMethod(m, d).conditions_met);
}

// The whole-run analysis: rest 2 h, then 0.2 It to the cutoff.
TEST(RunAnalysis, ConstantCurrentRunWithRestStep) {
  std::vector<Sample> s;
  for (int k = 0; k <= 120; ++k) s.push_back({k * 60.0, 4.15, 0.0, 20.0, 0});
  double t0 = 7200.0;
  // 0.5 A for 5 h 7 min, voltage falling linearly from 4.1 V to 2.7 V.
  const double dur = 5 * 3600.0 + 420.0;
  for (int k = 1; k <= static_cast<int>(dur); ++k) {
    double f = k / dur;
    s.push_back({t0 + k, 4.1 - 1.4 * f, 0.5, 20.0 + 4.0 * f, 1});
  }
  RunContext ctx;
  ctx.rated_mah = 2500;
  ctx.chemistry = "li-ion";
  ctx.cutoff_v = 2.75;
  ctx.steps = {{0, "rest", 0.0, 7200.0}, {1, "constant-current discharge", 7200.0, t0 + dur}};
  RunAnalysis a = AnalyseRun(s, ctx);
  ASSERT_EQ(a.main_discharge_step, 1);
  // 0.5 A × (dur - 0.5 s of ramp from the rest sample) (Q = I·t).
  EXPECT_NEAR(a.discharge_charge_mah, 0.5 * (dur - 0.5) / 3.6, 1e-6);
  EXPECT_NEAR(a.mid_voltage_v, 4.1 - 1.4 * 0.5, 1.4 / dur);
  ASSERT_TRUE(a.time_to_cutoff_s.has_value());
  // From the commanded start of the discharge to the first sample at or
  // below the cutoff: sample k reads 4.1 - 1.4 k / dur.
  EXPECT_DOUBLE_EQ(*a.time_to_cutoff_s, std::ceil(dur * (4.1 - 2.75) / 1.4));
  EXPECT_NEAR(a.temperature_rise_c, 4.0, 1e-9);
  EXPECT_NEAR(a.max_temperature_c, 24.0, 1e-9);
  EXPECT_TRUE(a.verdict.capacity_pass);
  EXPECT_TRUE(a.verdict.conditions_met) << a.verdict.text;
  EXPECT_FALSE(a.pulsed);
  EXPECT_TRUE(a.gaps.empty());
  EXPECT_EQ(a.method, IntegrationMethod::kSampleTrapezoid);
  // A rest-to-discharge boundary is not a two-current DC-IR edge (only edges
  // inside dcir, pulse and duty steps are): no point.
  EXPECT_TRUE(a.dcir.empty());
  // The verdict judges the discharge step itself: 0.2 It commanded.
  EXPECT_TRUE(a.verdict.judged) << a.verdict.text;
  EXPECT_NEAR(a.average_current_a, 0.5 * (dur - 0.5) / dur, 1e-9);
}

// A gap the runner logged is reported once, even when the spacing shows it too.
TEST(RunAnalysis, RecordedAndDetectedGapsMerge) {
  std::vector<Sample> s;
  for (int k = 0; k < 50; ++k) s.push_back({k * 1.0, 3.8, 0.5, 22, 0});
  for (int k = 0; k < 50; ++k) s.push_back({1000.0 + k, 3.8, 0.5, 22, 0});
  for (int k = 0; k < 50; ++k) s.push_back({1051.0 + 3.0 * k, 3.8, 0.5, 22, 0});
  RunContext ctx;
  ctx.recorded_gaps = {{49.0, 1000.0, 0}, {1048.0, 1049.0, 0}};
  RunAnalysis a = AnalyseRun(s, ctx);
  ASSERT_EQ(a.gaps.size(), 2u);
  EXPECT_DOUBLE_EQ(a.gaps[0].t_start_s, 49.0);
  EXPECT_DOUBLE_EQ(a.gaps[1].t_start_s, 1048.0);
  // Charge still bridges the gap (trapezoid over actual times).
  EXPECT_NEAR(a.totals.charge_mah, 0.5 * (s.back().t_s - s.front().t_s) / 3.6, 1e-9);
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

// Regression: "alkaline" contains the letters "li" but is not a lithium cell;
// IEC 61960-3 covers secondary lithium cells only (from memory).
TEST(MethodForChemistry, AlkalineIsNotJudgedAsLithium) {
  EXPECT_EQ(MethodForChemistry("alkaline").name.find("61960"), std::string::npos);
  EXPECT_NE(MethodForChemistry("li-ion").name.find("61960"), std::string::npos);
  EXPECT_NE(MethodForChemistry("LiFePO4").name.find("61960"), std::string::npos);
  EXPECT_NE(MethodForChemistry("NiMH").name.find("61951"), std::string::npos);
  // Li-MnO2 coin cells are primaries: IEC 61960-3 is for secondary cells.
  EXPECT_EQ(MethodForChemistry("li-mno2").name.find("61960"), std::string::npos);
  EXPECT_TRUE(MethodForChemistry("li-mno2").any_rate);
}

// Primary cells are rated by application discharge tests of IEC 60086 (a load
// and an end voltage), not at 0.2 It (from memory): any constant current is
// their capacity test, judged against the rating with no rest required; a
// pulsed discharge still is not.
TEST(Verdict, PrimaryCellsAreJudgedAtTheProceduresDrain) {
  CapacityMethod m = MethodForChemistry("alkaline");
  DischargeConditions d;
  d.rated_mah = 2400;
  d.delivered_mah = 2520;
  d.mean_current_a = 0.025;  // a light 25 mA drain, about 0.01 It
  d.max_current_deviation_a = 0.0001;
  d.start_temperature_c = 21.0;
  d.min_temperature_c = 21.0;
  d.max_temperature_c = 21.5;
  d.end_voltage_v = 0.9;
  CapacityJudgement j = JudgeCapacityByMethod(m, d);
  EXPECT_TRUE(j.judged) << j.text;
  EXPECT_TRUE(j.capacity_pass);
  EXPECT_TRUE(j.conditions_met) << j.text;  // no rest step needed
  EXPECT_EQ(j.brief, "PASS 105.0 %");
  d.pulsed = true;
  EXPECT_FALSE(JudgeCapacityByMethod(m, d).judged);
}

}  // namespace
}  // namespace kp
