#include "ui/panel/view_model.h"

#include <gtest/gtest.h>

#include "analysis/metrics.h"

namespace kp::ui {
namespace {

std::vector<Sample> Ramp(int n, double dt, double i_a) {
  std::vector<Sample> s;
  for (int k = 0; k < n; ++k) s.push_back({k * dt, 4.1 - 0.0001 * k, i_a + 0.01 * (k % 3), 25.0 + 0.001 * k, 0});
  return s;
}

TEST(RunningFigures, IncrementalMatchesBatchAnalysis) {
  auto s = Ramp(5000, 1.0, 0.5);
  RunningFigures f;
  for (const Sample& x : s) f.Add(x);
  RunFigures batch = ComputeRunFigures(s);
  EXPECT_NEAR(f.charge_mah(), batch.charge_mah, 1e-9 * batch.charge_mah);
  EXPECT_NEAR(f.energy_wh(), batch.energy_wh, 1e-9 * batch.energy_wh);
  EXPECT_NEAR(f.mean_voltage_v(), batch.mean_voltage_v, 1e-12);
  EXPECT_DOUBLE_EQ(f.min_voltage_v(), batch.min_voltage_v);
  EXPECT_DOUBLE_EQ(f.max_temperature_c(), batch.max_temperature_c);
  // Independent check: 0.5 A for one hour is 500 mAh (definition of mAh);
  // the ±0.01 A ripple averages to +0.01 A.
  RunningFigures flat;
  for (int k = 0; k <= 3600; ++k) flat.Add({static_cast<double>(k), 3.7, 0.5, 25.0, 0});
  EXPECT_NEAR(flat.charge_mah(), 500.0, 1e-9);
  EXPECT_NEAR(flat.energy_wh(), 1.85, 1e-12);
}

TEST(ScanLimits, ReadsKeywordsAndSkipsComments) {
  DrawnLimits d = ScanLimits(
      "# cutoff 9.9 in a comment\ncell li-ion rated 2500 mAh cutoff 2.750 V max-temp 60.0 degC\n"
      "limits: min_voltage = 2.45, Max-Voltage: 4.25V\n",
      {});
  ASSERT_TRUE(d.cutoff_v);
  EXPECT_DOUBLE_EQ(*d.cutoff_v, 2.75);
  ASSERT_TRUE(d.max_temp_c);
  EXPECT_DOUBLE_EQ(*d.max_temp_c, 60.0);
  ASSERT_TRUE(d.min_voltage_v);
  EXPECT_DOUBLE_EQ(*d.min_voltage_v, 2.45);
  ASSERT_TRUE(d.max_voltage_v);
  EXPECT_DOUBLE_EQ(*d.max_voltage_v, 4.25);
}

TEST(ScanLimits, FallsBackToStepLabelAndInventsNothing) {
  StepRow step;
  step.label = "discharge 0.2C (500 mA) to 2.90 V";
  DrawnLimits d = ScanLimits("discharge 500 mA\n", {step});
  ASSERT_TRUE(d.cutoff_v);
  EXPECT_DOUBLE_EQ(*d.cutoff_v, 2.9);
  EXPECT_FALSE(d.max_temp_c);
  EXPECT_FALSE(d.min_voltage_v);
  DrawnLimits none = ScanLimits("rest 10 min\n", {});
  EXPECT_FALSE(none.cutoff_v);
}

TEST(RunList, VerdictAndFilter) {
  RunRow run;
  run.id = 7;
  run.cell = "demo-cell-A1";
  run.chemistry = "li-ion";
  run.procedure_name = "rated-capacity";
  run.rated_mah = 1000.0;
  run.procedure_text =
      "cell li-ion rated=1000mAh nominal=3.6V max=4.2V cutoff=3.0V max-temp=60degC\n"
      "discharge 0.2C until voltage<=3.0V\n";
  run.outcome = Outcome::kCompleted;
  RunningFigures f;
  for (int k = 0; k <= 7200; ++k) f.Add({static_cast<double>(k), 3.7, 0.51, 25.0, 0});  // 1020 mAh
  RunListRow row = MakeRunListRow(run, f);
  EXPECT_EQ(row.verdict, "PASS 102.0 %");
  EXPECT_DOUBLE_EQ(row.elapsed_s, 7200.0);
  EXPECT_TRUE(MatchesFilter(row, ""));
  EXPECT_TRUE(MatchesFilter(row, "A1 completed"));
  EXPECT_TRUE(MatchesFilter(row, "#7"));
  EXPECT_TRUE(MatchesFilter(row, "pass"));
  EXPECT_FALSE(MatchesFilter(row, "aborted"));
  EXPECT_FALSE(MatchesFilter(row, "A1 nimh"));
  // The traceable record is searched too: serial, lot, tags, operator, UUID.
  run.cell_serial = "SN-4711";
  run.cell_lot = "LOT-B";
  run.operator_name = "Ann Lee";
  run.tags = {"incoming", "shelf-3"};
  run.uuid = "123e4567-e89b-42d3-a456-426614174000";
  RunListRow traced = MakeRunListRow(run, f);
  EXPECT_TRUE(MatchesFilter(traced, "sn-4711"));
  EXPECT_TRUE(MatchesFilter(traced, "lot-b shelf-3"));
  EXPECT_TRUE(MatchesFilter(traced, "ann 123e4567"));
  EXPECT_FALSE(MatchesFilter(traced, "SN-4712"));
  EXPECT_FALSE(MatchesFilter(row, "sn-4711"));
  run.outcome = Outcome::kRunning;
  EXPECT_EQ(MakeRunListRow(run, f).verdict, "-");
  run.outcome = Outcome::kCompleted;
  run.rated_mah = 2000.0;
  run.procedure_text =
      "cell li-ion rated=2000mAh nominal=3.6V max=4.2V cutoff=3.0V max-temp=60degC\n"
      "discharge 400mA until voltage<=3.0V\n";
  EXPECT_EQ(MakeRunListRow(run, f).verdict, "FAIL 51.0 %");
  // Only the method's own test gets PASS or FAIL: not a pulse train, not another rate.
  run.procedure_text =
      "cell li-ion rated=2000mAh nominal=3.6V max=4.2V cutoff=3.0V max-temp=60degC\n"
      "pulse 2A/2s 0A/8s until voltage<=3.0V\n";
  EXPECT_EQ(MakeRunListRow(run, f).verdict, "not judged: pulsed discharge");
  run.procedure_text =
      "cell li-ion rated=2000mAh nominal=3.6V max=4.2V cutoff=3.0V max-temp=60degC\n"
      "discharge 1C until voltage<=3.0V\n";
  EXPECT_EQ(MakeRunListRow(run, f).verdict, "not judged: constant current at 1.00 It");
  run.outcome = Outcome::kAborted;
  EXPECT_EQ(MakeRunListRow(run, f).verdict, "incomplete");
}

TEST(EstimateRemaining, ChargeAndSlopeBothBound) {
  // 1 A, rated 1000 mAh, 400 delivered: 600 mAh left at 1 A is 36 min.
  std::vector<Sample> flat;
  for (int k = 0; k < 100; ++k) flat.push_back({static_cast<double>(k), 3.7, 1.0, 25, 0});
  auto r = EstimateRemainingS(flat, 400.0, 1000.0, std::nullopt);
  ASSERT_TRUE(r);
  EXPECT_NEAR(*r, 2160.0, 1e-9);
  // Voltage falling 1 mV/s, 0.2 V above cutoff: 200 s, sooner than the charge bound.
  std::vector<Sample> falling;
  for (int k = 0; k < 100; ++k) falling.push_back({static_cast<double>(k), 3.2 - 0.001 * k, 1.0, 25, 0});
  auto r2 = EstimateRemainingS(falling, 400.0, 1000.0, 3.2 - 0.099 - 0.2);
  ASSERT_TRUE(r2);
  EXPECT_NEAR(*r2, 200.0, 1e-6);
  EXPECT_FALSE(EstimateRemainingS({}, 0, 1000, 3.0));
  // Resting cell, no rating, no cutoff: no estimate.
  std::vector<Sample> rest = {{0, 3.7, 0, 25, 0}, {1, 3.7, 0, 25, 0}};
  EXPECT_FALSE(EstimateRemainingS(rest, 0, 0, std::nullopt));
}

TEST(Events, AlarmsStandOut) {
  EXPECT_EQ(EventSeverity({0, "abort", "over-temperature", ""}), Severity::kAlarm);
  EXPECT_EQ(EventSeverity({0, "fault", "meter lost", ""}), Severity::kAlarm);
  EXPECT_EQ(EventSeverity({0, "retry", "timeout", ""}), Severity::kNotice);
  EXPECT_EQ(EventSeverity({0, "step", "discharge", ""}), Severity::kInfo);
}

RunRow RunIn(Outcome o, std::string reason = "") {
  RunRow r;
  r.id = 4;
  r.outcome = o;
  r.reason = std::move(reason);
  return r;
}

// The event kinds and messages are the runner's own (rig/run_controller.cpp:
// Hold and PollControl).
TEST(RunStatus, PausedHeldAndReleasedFromTheRunnersEvents) {
  std::vector<EventRow> e = {{0, "step", "step 1: discharge", ""}};
  RunStatus st = StatusOf(RunIn(Outcome::kRunning), e);
  EXPECT_EQ(st.state, RunState::kRunning);
  EXPECT_EQ(st.badge, "RUNNING");
  EXPECT_FALSE(st.load_off);
  EXPECT_TRUE(st.can_pause);
  EXPECT_FALSE(st.can_continue);
  EXPECT_TRUE(st.can_abort);

  e.push_back({600, "control", "paused by panel", ""});
  e.push_back({620, "control", "pause by panel ignored: run is paused", ""});
  e.push_back({630, "retry", "meter: 1 exchange repeated", ""});
  st = StatusOf(RunIn(Outcome::kRunning), e);
  EXPECT_EQ(st.state, RunState::kPaused);
  EXPECT_EQ(st.badge, "PAUSED");
  EXPECT_EQ(st.reason, "paused by panel");
  EXPECT_DOUBLE_EQ(st.since_s, 600);
  EXPECT_TRUE(st.load_off);
  EXPECT_FALSE(st.can_pause);  // only the actions that apply
  EXPECT_TRUE(st.can_continue);
  EXPECT_TRUE(st.can_abort);

  e.push_back({900, "control", "continued by panel", ""});
  EXPECT_EQ(StatusOf(RunIn(Outcome::kRunning), e).state, RunState::kRunning);

  // The runner's own hold for heat, released when the cell cooled.
  e.push_back({1200, "pause", "temperature 56.0 degC above 55 degC: load off until the cell cools", ""});
  st = StatusOf(RunIn(Outcome::kRunning), e);
  EXPECT_EQ(st.state, RunState::kHeld);
  EXPECT_EQ(st.badge, "HELD");
  EXPECT_NE(st.reason.find("temperature"), std::string::npos);
  EXPECT_FALSE(st.can_pause);
  EXPECT_FALSE(st.can_continue);  // a hold ends by itself
  EXPECT_TRUE(st.can_abort);
  e.push_back({1500, "resume", "cell cooled to 45.0 degC; continuing", ""});
  EXPECT_EQ(StatusOf(RunIn(Outcome::kRunning), e).state, RunState::kRunning);

  // A lost instrument: held, then a gap and a resume.
  e.push_back({1800, "fault", "meter: no answer (timeout)", ""});
  EXPECT_EQ(StatusOf(RunIn(Outcome::kRunning), e).state, RunState::kHeld);
  e.push_back({1812, "gap", "no readings for 12.0 s while an instrument did not answer", ""});
  EXPECT_EQ(StatusOf(RunIn(Outcome::kRunning), e).state, RunState::kHeld);
  e.push_back({1812, "resume", "instruments answer again after 12.0 s with the load off; continuing", ""});
  EXPECT_EQ(StatusOf(RunIn(Outcome::kRunning), e).state, RunState::kRunning);
}

TEST(RunStatus, EndedRunsHaveTheLoadOffAndNoActions) {
  std::vector<EventRow> paused = {{600, "control", "paused by panel", ""}};
  for (auto [o, badge] : {std::pair{Outcome::kCompleted, "COMPLETED"}, std::pair{Outcome::kAborted, "ABORTED"},
                          std::pair{Outcome::kInterrupted, "INTERRUPTED"}}) {
    RunStatus st = StatusOf(RunIn(o, "why it ended"), paused);  // the outcome wins over an old pause
    EXPECT_EQ(st.badge, badge);
    EXPECT_EQ(st.reason, "why it ended");
    EXPECT_TRUE(st.load_off);
    EXPECT_FALSE(st.can_pause || st.can_continue || st.can_abort);
  }
  // The word every other view uses.
  EXPECT_STREQ(RunStateWord(RunState::kCompleted), "completed");
}

TEST(RunStatus, ListRowShowsThePause) {
  RunListRow row;
  row.state = "running";
  SetListState(row, StatusOf(RunIn(Outcome::kRunning), {{600, "control", "paused by panel", ""}}));
  EXPECT_EQ(row.state, "paused");
  EXPECT_EQ(row.run_state, RunState::kPaused);
  EXPECT_TRUE(MatchesFilter(row, "paused"));
}

TEST(GapTimes, OnlyGapEvents) {
  std::vector<EventRow> e = {{50, "gap", "resumed after 40 s unattended", ""},
                             {10, "step", "rest (log-change)", ""},
                             {30, "gap", "no readings for 5.0 s", ""}};
  EXPECT_EQ(GapTimes(e), (std::vector<double>{30, 50}));
  EXPECT_TRUE(GapTimes({{10, "step", "rest", ""}}).empty());
}

TEST(DistinctLabels, KeepsWhatDiffers) {
  EXPECT_EQ(DistinctLabels({"bench check: capacity at 1 It", "bench check: capacity at 0.5 It", "bench check: peak load 2 A"}),
            (std::vector<std::string>{"capacity at 1 It", "capacity at 0.5 It", "peak load 2 A"}));
  // Only a family prefix ending in ':' goes; shared plain words stay, so two rates read as rates.
  EXPECT_EQ(DistinctLabels({"demo: rate 1 A", "demo: rate 2 A"}), (std::vector<std::string>{"rate 1 A", "rate 2 A"}));
  EXPECT_EQ(DistinctLabels({"rate 1 A", "rate 2 A"}), (std::vector<std::string>{"rate 1 A", "rate 2 A"}));
  // Identical names (the same procedure twice) and single names stay whole.
  EXPECT_EQ(DistinctLabels({"rated capacity", "rated capacity"}), (std::vector<std::string>{"rated capacity", "rated capacity"}));
  EXPECT_EQ(DistinctLabels({"one"}), (std::vector<std::string>{"one"}));
  // A name that is all shared prefix keeps its whole text.
  EXPECT_EQ(DistinctLabels({"lab:", "lab: capacity at 2 A"}), (std::vector<std::string>{"lab:", "capacity at 2 A"}));
}

float CharWidth(const std::string& s, void*) {
  // Every UTF-8 character 1 unit wide.
  float n = 0;
  for (unsigned char c : s)
    if ((c & 0xC0) != 0x80) n += 1;
  return n;
}

TEST(Ellipsize, CutsWithDotsOnlyWhenNeeded) {
  EXPECT_EQ(Ellipsize("LN-2500 #1", 20, CharWidth, nullptr), "LN-2500 #1");
  EXPECT_EQ(Ellipsize("bench check: capacity", 10, CharWidth, nullptr), "bench che\xE2\x80\xA6");
  // No trailing space before the dots, and never half a UTF-8 character.
  EXPECT_EQ(Ellipsize("ab cd", 4, CharWidth, nullptr), "ab\xE2\x80\xA6");
  EXPECT_EQ(Ellipsize("25\xC2\xB0" "C to 45\xC2\xB0" "C", 4, CharWidth, nullptr), "25\xC2\xB0\xE2\x80\xA6");
  EXPECT_LE(CharWidth(Ellipsize("a long procedure name", 7, CharWidth, nullptr), nullptr), 7);
}

TEST(CurrentStep, TakesTheLatest) {
  EXPECT_EQ(CurrentStep({}).index, -1);
  StepRow a{0, 0, "rest", "rest 10 min", 0.0, 600.0, "time"};
  StepRow b{1, 1, "cc", "discharge to 2.75 V", 600.0, std::nullopt, ""};
  StepNow now = CurrentStep({a, b});
  EXPECT_EQ(now.index, 1);
  EXPECT_FALSE(now.ended);
  EXPECT_EQ(now.label, "discharge to 2.75 V");
}

}  // namespace
}  // namespace kp::ui

namespace kp::ui {
namespace {

TEST(LimitsForRun, ComesFromTheCompiledProcedure) {
  const char* text =
      "name \"limits\"\n"
      "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n"
      "safety max-temp=52degC\n"
      "discharge 0.2C until voltage<=2.75V\n";
  DrawnLimits d = LimitsForRun(text, "limits", {});
  ASSERT_TRUE(d.cutoff_v);
  EXPECT_DOUBLE_EQ(*d.cutoff_v, 2.75);
  ASSERT_TRUE(d.max_temp_c);
  EXPECT_DOUBLE_EQ(*d.max_temp_c, 52.0);
  ASSERT_TRUE(d.max_voltage_v);
  EXPECT_GE(*d.max_voltage_v, 4.2);
  // A record the parser refuses still gets what the text states.
  DrawnLimits old = LimitsForRun("cutoff 3.0 V\n", "old", {});
  ASSERT_TRUE(old.cutoff_v);
  EXPECT_DOUBLE_EQ(*old.cutoff_v, 3.0);
}

}  // namespace
}  // namespace kp::ui

namespace kp::ui {
namespace {

// Regression: a run that charges first listed a negative delivered charge.
TEST(RunningFigures, DeliveredCountsDischargeOnly) {
  RunningFigures f;
  for (int k = 0; k <= 3600; ++k) f.Add({static_cast<double>(k), 4.0, -1.0, 25.0, 0});         // 1 Ah in
  for (int k = 3601; k <= 7200; ++k) f.Add({static_cast<double>(k), 3.7, 0.5, 25.0, 1});       // 0.5 Ah out
  EXPECT_NEAR(f.discharged_mah(), 500.0, 0.5);  // one mixed interval at the turn
  EXPECT_NEAR(f.charge_mah(), -500.0, 0.5);
  EXPECT_NEAR(f.charged_mah(), 1000.0, 0.5);
  // Energy out counts the discharge only: 0.5 A at 3.7 V for 1 h (E = V·I·t).
  EXPECT_NEAR(f.discharged_wh(), 1.85, 0.01);
  EXPECT_NEAR(f.energy_wh(), 1.85 - 4.0, 0.01);
  EXPECT_NEAR(f.discharged_since_charge_mah(), 500.0, 0.5);
  // A second charge starts the count again; rest readings do not.
  for (int k = 7201; k <= 7300; ++k) f.Add({static_cast<double>(k), 3.9, 0.0, 25.0, 2});
  EXPECT_NEAR(f.discharged_since_charge_mah(), 500.0, 0.5);
  for (int k = 7301; k <= 7400; ++k) f.Add({static_cast<double>(k), 4.1, -1.0, 25.0, 3});
  for (int k = 7401; k <= 7760; ++k) f.Add({static_cast<double>(k), 3.8, 1.0, 25.0, 4});  // 100 mAh out
  EXPECT_NEAR(f.discharged_since_charge_mah(), 100.0, 0.5);
  EXPECT_NEAR(f.discharged_mah(), 600.0, 1.0);
}

}  // namespace
}  // namespace kp::ui
