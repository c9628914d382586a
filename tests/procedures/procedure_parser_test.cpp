#include "procedures/procedure_parser.h"

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <sstream>

#include "procedures/estimate.h"
#include "procedures/units.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

const char* kCell = "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n";

ParseOutput Parse(const std::string& text, const RigLimits& rig = {}) { return ParseProcedure(text, "t", rig); }

std::string Errors(const ParseOutput& p) { return FormatDiagnostics("t", p.errors); }

// ---------------------------------------------------------------- units ----

struct UnitCase {
  const char* unit;
  Dimension dim;
  double scale;
};

TEST(Units, EveryUnitAndPrefix) {
  const UnitCase cases[] = {
      {"uA", Dimension::kCurrent, 1e-6},
      {"\xC2\xB5"
       "A",
       Dimension::kCurrent, 1e-6},
      {"\xCE\xBC"
       "A",
       Dimension::kCurrent, 1e-6},
      {"mA", Dimension::kCurrent, 1e-3},
      {"A", Dimension::kCurrent, 1.0},
      {"kA", Dimension::kCurrent, 1e3},
      {"uW", Dimension::kPower, 1e-6},
      {"mW", Dimension::kPower, 1e-3},
      {"W", Dimension::kPower, 1.0},
      {"kW", Dimension::kPower, 1e3},
      {"mOhm", Dimension::kResistance, 1e-3},
      {"Ohm", Dimension::kResistance, 1.0},
      {"kOhm", Dimension::kResistance, 1e3},
      {"\xCE\xA9", Dimension::kResistance, 1.0},
      {"m\xCE\xA9", Dimension::kResistance, 1e-3},
      {"uV", Dimension::kVoltage, 1e-6},
      {"mV", Dimension::kVoltage, 1e-3},
      {"V", Dimension::kVoltage, 1.0},
      {"ms", Dimension::kTime, 1e-3},
      {"s", Dimension::kTime, 1.0},
      {"min", Dimension::kTime, 60.0},
      {"h", Dimension::kTime, 3600.0},
      {"uAh", Dimension::kCharge, 1e-3},
      {"\xC2\xB5"
       "Ah",
       Dimension::kCharge, 1e-3},
      {"mAh", Dimension::kCharge, 1.0},
      {"Ah", Dimension::kCharge, 1000.0},
      {"mWh", Dimension::kEnergy, 1e-3},
      {"Wh", Dimension::kEnergy, 1.0},
      {"kWh", Dimension::kEnergy, 1e3},
      {"degC", Dimension::kTemperature, 1.0},
      {"C", Dimension::kCRate, 1.0},
      {"%", Dimension::kPercent, 1.0},
  };
  for (const UnitCase& c : cases) {
    auto u = ParseUnit(c.unit);
    ASSERT_TRUE(u.has_value()) << c.unit;
    EXPECT_EQ(u->dimension, c.dim) << c.unit;
    EXPECT_DOUBLE_EQ(u->scale, c.scale) << c.unit;
  }
  for (const char* bad : {"", "mC", "kdegC", "mmA", "Amp", "sec", "mh", "M", "uh", "V2", "MA", "m"}) {
    EXPECT_FALSE(ParseUnit(bad).has_value()) << bad;
  }
}

TEST(Units, QuantitiesInProcedures) {
  // Each unit written where the language takes it; values land in SI names.
  std::string text = std::string(kCell) +
                     "safety max-current=7500mA max-voltage=4300mV max-time=90min max-charge=3.1Ah max-temp=55degC\n"
                     "discharge 15uA until time>=2h\n"
                     "discharge 250mW until energy>=500mWh\n"
                     "discharge 3.9Ohm until voltage<=3V\n"
                     "discharge 0.4C until charge>=10%\n"
                     "discharge 1A until charge>=1500uAh or charge>=2Ah\n"
                     "rest 1500ms\n";
  auto p = Parse(text);
  ASSERT_TRUE(p.ok()) << Errors(p);
  const Plan& plan = p.plan;
  EXPECT_DOUBLE_EQ(plan.limits.max_current_a, 7.5);
  EXPECT_DOUBLE_EQ(plan.limits.max_voltage_v, 4.3);
  EXPECT_DOUBLE_EQ(plan.limits.max_total_s, 5400.0);
  EXPECT_DOUBLE_EQ(plan.limits.max_charge_mah, 3100.0);
  EXPECT_DOUBLE_EQ(plan.limits.max_temp_c, 55.0);
  ASSERT_EQ(plan.steps.size(), 6u);
  EXPECT_DOUBLE_EQ(plan.steps[0].current_a, 15e-6);
  EXPECT_DOUBLE_EQ(*plan.steps[0].end.time_s, 7200.0);
  EXPECT_EQ(plan.steps[1].kind, StepKind::kConstantPower);
  EXPECT_DOUBLE_EQ(plan.steps[1].power_w, 0.25);
  EXPECT_DOUBLE_EQ(*plan.steps[1].end.energy_wh, 0.5);
  EXPECT_EQ(plan.steps[2].kind, StepKind::kConstantResistance);
  EXPECT_DOUBLE_EQ(plan.steps[2].resistance_ohm, 3.9);
  EXPECT_DOUBLE_EQ(plan.steps[3].current_a, 1.0);           // 0.4 x 2500 mAh / 1 h
  EXPECT_DOUBLE_EQ(*plan.steps[3].end.charge_mah, 250.0);   // 10 % of rated
  EXPECT_DOUBLE_EQ(*plan.steps[4].end.charge_mah, 2000.0);  // the last one written wins
  EXPECT_DOUBLE_EQ(*plan.steps[5].end.time_s, 1.5);
}

// ----------------------------------------------------------- constructs ----

TEST(Parser, EveryConstruct) {
  const char* text = R"(# a comment line
name "all constructs"   # trailing comment
cell li-ion rated=2000mAh nominal=3.6V max=4.2V cutoff=3.0V max-temp=60degC

safety max-temp=50degC min-voltage=2.8V max-voltage=4.25V max-current=5A max-time=20h max-charge=2500mAh
safety when-hot=pause resume-temp=40degC hard-temp=58degC
sample every=2s log-change=3mV

profile node
  phase sleep 10uA/50s
  phase radio 30mA/500ms
  phase sense 5mA/1s
end

charge 0.5C to 4.2V until current<=40mA or time>=3h every=5s
rest 1h
discharge 0.2C until voltage<=3.0V or temp>=45degC every=1s log-change=1mV log-gap=5min
discharge 2W until voltage<=3.1V
discharge 10Ohm until time>=30min
pulse 2A/10s 0.1A/40s until voltage<=3.2V every=500ms
cycle node compress=5s until voltage<=3.0V
dcir 0.2C/10s 1C/1s every=100ms
repeat 3
  repeat until voltage<=3.3V or charge>=500mAh
    discharge 1A until charge>=100mAh or voltage>=4.3V
  end
  rest 10min
end
)";
  auto p = Parse(text);
  ASSERT_TRUE(p.ok()) << Errors(p);
  const Plan& plan = p.plan;
  EXPECT_EQ(plan.name, "all constructs");
  EXPECT_EQ(plan.cell.chemistry, "li-ion");
  EXPECT_DOUBLE_EQ(plan.cell.rated_mah, 2000);
  EXPECT_DOUBLE_EQ(plan.cell.nominal_v, 3.6);
  EXPECT_DOUBLE_EQ(plan.cell.max_v, 4.2);
  EXPECT_DOUBLE_EQ(plan.cell.cutoff_v, 3.0);
  EXPECT_EQ(plan.limits.over_temp_action, OverTempAction::kPause);
  EXPECT_DOUBLE_EQ(plan.limits.resume_temp_c, 40);
  EXPECT_DOUBLE_EQ(plan.limits.hard_temp_c, 58);
  EXPECT_DOUBLE_EQ(plan.limits.min_voltage_v, 2.8);
  ASSERT_EQ(plan.steps.size(), 10u);

  const Step& charge = plan.steps[0];
  EXPECT_EQ(charge.kind, StepKind::kCharge);
  EXPECT_DOUBLE_EQ(charge.charge_current_a, 1.0);
  EXPECT_DOUBLE_EQ(charge.charge_voltage_v, 4.2);
  EXPECT_DOUBLE_EQ(*charge.end.current_below_a, 0.04);
  EXPECT_DOUBLE_EQ(*charge.end.time_s, 3 * 3600.0);
  EXPECT_DOUBLE_EQ(charge.sample_period_s, 5);
  EXPECT_DOUBLE_EQ(*charge.log_change_v, 0.003);  // from the sample line

  const Step& rest = plan.steps[1];
  EXPECT_EQ(rest.kind, StepKind::kRest);
  EXPECT_DOUBLE_EQ(*rest.end.time_s, 3600);
  EXPECT_DOUBLE_EQ(rest.sample_period_s, 2);

  const Step& cc = plan.steps[2];
  EXPECT_EQ(cc.kind, StepKind::kConstantCurrent);
  EXPECT_DOUBLE_EQ(cc.current_a, 0.4);
  EXPECT_DOUBLE_EQ(*cc.end.voltage_below_v, 3.0);
  EXPECT_DOUBLE_EQ(*cc.end.temperature_above_c, 45);
  EXPECT_DOUBLE_EQ(*cc.log_change_v, 0.001);
  EXPECT_DOUBLE_EQ(cc.log_max_gap_s, 300);
  EXPECT_EQ(cc.label, "discharge 0.2C until voltage<=3.0V or temp>=45degC every=1s log-change=1mV log-gap=5min");
  EXPECT_EQ(cc.source_line, 17);

  EXPECT_EQ(plan.steps[3].kind, StepKind::kConstantPower);
  EXPECT_EQ(plan.steps[4].kind, StepKind::kConstantResistance);
  EXPECT_DOUBLE_EQ(*plan.steps[4].end.time_s, 1800);

  const Step& pulse = plan.steps[5];
  EXPECT_EQ(pulse.kind, StepKind::kPulseTrain);
  ASSERT_EQ(pulse.segments.size(), 2u);
  EXPECT_DOUBLE_EQ(pulse.segments[0].level, 2.0);
  EXPECT_DOUBLE_EQ(pulse.segments[0].duration_s, 10);
  EXPECT_DOUBLE_EQ(pulse.segments[1].level, 0.1);
  EXPECT_DOUBLE_EQ(pulse.segments[1].duration_s, 40);
  EXPECT_DOUBLE_EQ(pulse.sample_period_s, 0.5);

  const Step& cyc = plan.steps[6];
  EXPECT_EQ(cyc.kind, StepKind::kDutyCycle);
  EXPECT_EQ(cyc.profile_name, "node");
  ASSERT_EQ(cyc.segments.size(), 3u);
  // The longest phase at the lowest current is the one compressed.
  EXPECT_EQ(cyc.segments[0].name, "sleep");
  EXPECT_DOUBLE_EQ(cyc.segments[0].duration_s, 5);
  EXPECT_DOUBLE_EQ(cyc.segments[0].real_duration_s, 50);
  EXPECT_TRUE(cyc.segments[0].compressed());
  EXPECT_FALSE(cyc.segments[1].compressed());
  EXPECT_DOUBLE_EQ(cyc.segments[1].level, 0.03);

  const Step& dcir = plan.steps[7];
  EXPECT_EQ(dcir.kind, StepKind::kResistanceTest);
  EXPECT_DOUBLE_EQ(dcir.segments[0].level, 0.4);
  EXPECT_DOUBLE_EQ(dcir.segments[1].level, 2.0);
  EXPECT_DOUBLE_EQ(dcir.segments[1].duration_s, 1.0);

  ASSERT_EQ(plan.loops.size(), 2u);
  // Outer loop first.
  EXPECT_EQ(plan.loops[0].count, 3);
  EXPECT_EQ(plan.loops[0].first_step, 8);
  EXPECT_EQ(plan.loops[0].last_step, 9);
  EXPECT_EQ(plan.loops[1].count, 0);
  EXPECT_EQ(plan.loops[1].first_step, 8);
  EXPECT_EQ(plan.loops[1].last_step, 8);
  EXPECT_DOUBLE_EQ(*plan.loops[1].until.voltage_below_v, 3.3);
  EXPECT_DOUBLE_EQ(*plan.loops[1].until.charge_mah, 500);
  EXPECT_DOUBLE_EQ(*plan.steps[8].end.voltage_above_v, 4.3);
  EXPECT_EQ(plan.source_text, text);
}

TEST(Parser, DefaultsFollowTheCell) {
  auto p = Parse(std::string(kCell) + "discharge 1A until voltage<=2.75V\n");
  ASSERT_TRUE(p.ok()) << Errors(p);
  EXPECT_DOUBLE_EQ(p.plan.limits.max_temp_c, 60);
  EXPECT_DOUBLE_EQ(p.plan.limits.min_voltage_v, 2.45);
  EXPECT_DOUBLE_EQ(p.plan.limits.max_voltage_v, 4.25);
  EXPECT_DOUBLE_EQ(p.plan.limits.max_current_a, 1.25);
  EXPECT_DOUBLE_EQ(p.plan.limits.max_charge_mah, 3750);
  EXPECT_EQ(p.plan.limits.over_temp_action, OverTempAction::kAbort);
}

TEST(Parser, RigLimitsCapThePlan) {
  RigLimits rig;
  rig.max_temp_c = 45;
  rig.max_current_a = 5;
  auto p = Parse(std::string(kCell) + "safety max-current=8A\ndischarge 1A until voltage<=2.75V\n", rig);
  ASSERT_TRUE(p.ok()) << Errors(p);
  EXPECT_DOUBLE_EQ(p.plan.limits.max_temp_c, 45);
  EXPECT_DOUBLE_EQ(p.plan.limits.max_current_a, 5);
  rig.has_supply = false;
  auto q = Parse(std::string(kCell) + "charge 1A to 4.2V until current<=50mA\n", rig);
  ASSERT_FALSE(q.ok());
  EXPECT_EQ(q.errors[0].line, 2);
  EXPECT_NE(q.errors[0].message.find("needs a supply"), std::string::npos) << Errors(q);
}

// -------------------------------------------------------------- errors ----

struct BadCase {
  std::string text;
  int line;
  int col;
  const char* contains;
};

TEST(Parser, MalformedInputsNameLineAndColumn) {
  const std::string H = kCell;
  const BadCase cases[] = {
      {"", 1, 1, "missing 'cell' line"},
      {H + "discharge 500 until voltage<=3V", 2, 11, "'500' has no unit"},
      {H + "discharge 500mA", 2, 16, "needs an end"},
      {H + "discharge 500mA until voltage<3V", 2, 30, "expected '<=' or '>='"},
      {H + "discharge 500mX until time>=1h", 2, 11, "unknown unit 'mX'"},
      {H + "discharge 2V until time>=1h", 2, 11, "must be a current, power or resistance"},
      {H + "rest until time>=5V", 2, 18, "needs a time"},
      {H + "rest until time<=5s", 2, 16, "'time' takes only '>='"},
      {H + "rest until volts<=3V", 2, 12, "unknown condition 'volts'"},
      {H + "rest 1h every=0s", 2, 15, "greater than zero"},
      {H + "rest 1h colour=red", 2, 9, "unknown step option 'colour'"},
      {H + "frobnicate 1A", 2, 1, "unknown statement 'frobnicate'"},
      {"discharge 1A until time>=1h", 1, 1, "'cell' line first"},
      {"cell li-ion rated=2500mAh", 1, 26, "needs cutoff="},
      {"cell li-ion cutoff=3V", 1, 22, "needs rated="},
      {H + H, 2, 1, "second 'cell' line"},
      {"cell li-ion rated=2500mAh cutoff=2.75V max=2.5V", 1, 1, "max= must be above"},
      {H + "discharge 0.2X until time>=1h", 2, 11, "unknown unit 'X'"},
      {H + "pulse 2A 10s 0A/1s until time>=1h", 2, 10, "expected '/'"},
      {H + "pulse 2A/10s until time>=1h", 2, 14, "expected the level between pulses"},
      {H + "play nope until time>=1h", 2, 6, "no duty named 'nope'"},
      {H + "duty p\nend", 3, 1, "has no phases"},
      {H + "duty p\nphase a 1A/1s", 2, 1, "'duty' is not closed"},
      {H + "repeat 3\nrest 1s", 2, 1, "'repeat' is not closed"},
      {H + "end", 2, 1, "'end' without"},
      {H + "repeat 0", 2, 8, "whole number"},
      {H + "repeat 2.5\nrest 1s\nend", 2, 8, "whole number"},
      {H + "repeat 3\nend", 3, 1, "has no steps"},
      {H + "phase a 1A/1s", 2, 1, "belongs inside a 'duty'"},
      {H + "duty p\nrest 1s\nend", 3, 1, "only 'phase' lines"},
      {H + "dcir 1A/10s 0.5A/1s", 2, 1, "second current must be higher"},
      {H + "dcir 0.2C/10s 1C/1s until time>=1s", 2, 21, "takes no 'until'"},
      {H + "charge 0.5C until current<=50mA", 2, 13, "expected 'to'"},
      {H + "charge 0.5C to 4.5V until current<=50mA", 2, 16, "above the cell's max"},
      {H + "charge 0.5C to 4.2V until voltage>=4.2V", 2, 40, "needs 'until current<=...'"},
      {H + "safety max-temp=60V", 2, 17, "needs a temperature"},
      {H + "safety frob=1A", 2, 8, "unknown safety limit 'frob'"},
      {H + "safety when-hot=pause\ndischarge 1A until time>=1h", 2, 17, "needs resume-temp="},
      {H + "safety when-hot=pause resume-temp=70degC\ndischarge 1A until time>=1h", 2, 35, "must be below max-temp"},
      {H + "safety when-hot=melt", 2, 17, "takes 'abort' or 'pause'"},
      {H + "safety max-current=1A\ndischarge 2A until time>=1h", 3, 11, "more than the safety limit"},
      {H + "discharge 1A until voltage<=2V", 2, 1, "below the safety min-voltage"},
      {H + "name \"unterminated", 2, 6, "unterminated string"},
      {H + "name plain", 2, 6, "name in quotes"},
      {H + "rest 1h @", 2, 9, "unexpected character '@'"},
      {H + "rest 1.2.3s", 2, 6, "malformed number"},
      {H, 1, 1, "no steps"},
      {H + "pulse 1A/10ms 0A/1s until time>=1h", 2, 1, "shorter than two readings"},
      {H + "discharge 1A until charge>=10", 2, 28, "'10' has no unit"},
      {"cell li-ion rated=0.2C cutoff=3V", 1, 19, "needs a charge"},
      {H + "sample every=1V", 2, 14, "needs a time"},
      {H + "discharge -1A until time>=1h", 2, 11, "cannot be negative"},
      {H + "rest 1h until", 2, 14, "expected a condition"},
      {H + "discharge 0Ohm until time>=1h", 2, 11, "greater than zero"},
      {H + "duty p\nphase s 1A/10s\nend\nplay p compress=20s until time>=1h", 5, 17, "not shorter than phase 's'"},
      {H + "rest 1h every", 2, 14, "expected '='"},
  };
  ASSERT_GE(std::size(cases), 30u);
  for (const BadCase& c : cases) {
    auto p = Parse(c.text);
    ASSERT_FALSE(p.ok()) << c.text;
    bool found = false;
    for (const Diagnostic& d : p.errors)
      found = found || (d.line == c.line && d.col == c.col && d.message.find(c.contains) != std::string::npos);
    EXPECT_TRUE(found) << "input:\n"
                       << c.text << "\nwanted " << c.line << ":" << c.col << " '" << c.contains << "', got:\n"
                       << Errors(p);
  }
}

TEST(Parser, ReportsSeveralErrorsAtOnce) {
  auto p = Parse(std::string(kCell) + "discharge 1 until time>=1h\nrest 5\nwobble\n");
  ASSERT_EQ(p.errors.size(), 3u) << Errors(p);
  EXPECT_EQ(p.errors[0].line, 2);
  EXPECT_EQ(p.errors[1].line, 3);
  EXPECT_EQ(p.errors[2].line, 4);
  std::string text = FormatDiagnostics("proc.kpp", p.errors);
  EXPECT_NE(text.find("proc.kpp:2:11: "), std::string::npos) << text;
  auto r = CompileProcedure(std::string(kCell) + "rest 5\n", "dir/proc.kpp");
  ASSERT_FALSE(r.ok());
  EXPECT_EQ(r.status().code(), StatusCode::kInvalidInput);
  EXPECT_NE(r.status().message().find("dir/proc.kpp:2:6: "), std::string::npos) << r.status().message();
}

// --------------------------------------------------------------- library ---

std::filesystem::path LibraryDir() {
  return testing::SourcePath("procedures/library");
}

TEST(Library, EveryFileChecksAndRoundTrips) {
  int files = 0;
  for (const auto& entry : std::filesystem::directory_iterator(LibraryDir())) {
    if (entry.path().extension() != ".kpp") continue;
    ++files;
    std::ifstream in(entry.path());
    std::stringstream ss;
    ss << in.rdbuf();
    auto plan = CompileProcedure(ss.str(), entry.path().string());
    ASSERT_TRUE(plan.ok()) << plan.status().message();
    // Every file names the source of its method in a comment.
    EXPECT_TRUE(ss.str().find("source") != std::string::npos || ss.str().find("memory") != std::string::npos) << entry.path();
    PlanEstimate est = EstimatePlan(*plan);
    EXPECT_TRUE(est.complete) << entry.path() << "\n" << DescribePlan(*plan, est);
    EXPECT_GT(est.total_s, 0) << entry.path();
    std::string described = DescribePlan(*plan, est);
    for (const Step& s : plan->steps) EXPECT_NE(described.find(s.label), std::string::npos) << s.label;
    // The text stored with a run compiles to the same plan again.
    auto again = CompileProcedure(plan->source_text, entry.path().string());
    ASSERT_TRUE(again.ok());
    ASSERT_EQ(again->steps.size(), plan->steps.size());
    for (size_t i = 0; i < plan->steps.size(); ++i) EXPECT_EQ(again->steps[i].label, plan->steps[i].label);
  }
  EXPECT_GE(files, 8);
}

// Compression is recorded so a run's time maps back to real time: with the
// 50 s sleep run as 5 s, one 6.5 s run cycle stands for 51.5 s.
TEST(Parser, CompressedTimeProjectsBack) {
  auto p = Parse(std::string(kCell) +
                 "duty n\n  phase sleep 10uA/50s\n  phase tx 30mA/1.5s\nend\nplay n compress=5s until time>=1h\n");
  ASSERT_TRUE(p.ok()) << Errors(p);
  const Step& s = p.plan.steps[0];
  EXPECT_DOUBLE_EQ(s.CycleSeconds(), 6.5);
  EXPECT_DOUBLE_EQ(s.RealSeconds(6.5), 51.5);
  EXPECT_DOUBLE_EQ(s.RealSeconds(2.5), 25.0);                   // half-way through the compressed sleep
  EXPECT_DOUBLE_EQ(s.RealSeconds(13.0 + 5.75), 103.0 + 50.75);  // two cycles, sleep, half the tx
  Step plain;
  EXPECT_DOUBLE_EQ(plain.RealSeconds(42.0), 42.0);
}

// Estimates from rated capacity alone: 0.2C empties a full cell in 5 h.
TEST(Estimate, CapacityCheckTakesFiveHours) {
  auto p = Parse(std::string(kCell) + "rest 30min\ndischarge 0.2C until voltage<=2.75V\n");
  ASSERT_TRUE(p.ok());
  PlanEstimate e = EstimatePlan(p.plan);
  EXPECT_DOUBLE_EQ(e.steps[0].duration_s, 1800);
  EXPECT_DOUBLE_EQ(e.steps[1].duration_s, 5 * 3600);
  EXPECT_DOUBLE_EQ(e.steps[1].charge_mah, 2500);
  EXPECT_DOUBLE_EQ(e.total_s, 5.5 * 3600);
}

// A charge step from a stated starting charge: constant current to full
// (the missing 60 % of 2500 mAh at 1250 mA: 4320 s), plus the
// constant-voltage allowance (a fifth more and a minute: the estimate's own
// rule). A full cell needs only the minute, as before.
TEST(Estimate, ChargeStepFromAStatedStartingCharge) {
  auto p = Parse(std::string(kCell) + "charge 0.5C to 4.2V until current<=0.02C or time>=4h\n");
  ASSERT_TRUE(p.ok()) << Errors(p);
  PlanEstimate part = EstimatePlan(p.plan, 0.4);
  EXPECT_DOUBLE_EQ(part.steps[0].duration_s, 4320 * 1.2 + 60);
  EXPECT_NEAR(part.steps[0].charge_mah, -1500, 1e-9);
  EXPECT_NE(DescribePlan(p.plan, part).find("assume the cell at 40 % at the start"), std::string::npos);
  PlanEstimate full = EstimatePlan(p.plan);
  EXPECT_DOUBLE_EQ(full.steps[0].duration_s, 60);
  EXPECT_NE(DescribePlan(p.plan, full).find("assume a full cell at the start"), std::string::npos);
  // A discharge from 40 % at 0.2C empties it in 2 h.
  auto d = Parse(std::string(kCell) + "discharge 0.2C until voltage<=2.75V\n");
  ASSERT_TRUE(d.ok());
  EXPECT_DOUBLE_EQ(EstimatePlan(d.plan, 0.4).steps[0].duration_s, 2 * 3600);
}

TEST(Estimate, StateOfChargeIsReadAsPercentOrFraction) {
  EXPECT_DOUBLE_EQ(*ParseStateOfCharge("40%", "--soc"), 0.4);
  EXPECT_DOUBLE_EQ(*ParseStateOfCharge("0.4", "--soc"), 0.4);
  EXPECT_DOUBLE_EQ(*ParseStateOfCharge("100%", "--soc"), 1.0);
  EXPECT_DOUBLE_EQ(*ParseStateOfCharge("0", "--soc"), 0.0);
  for (const char* bad : {"", "%", "40", "-5%", "101%", "abc", "4 0%", "nan", "inf%"}) {
    auto r = ParseStateOfCharge(bad, "--soc");
    ASSERT_FALSE(r.ok()) << bad;
    EXPECT_NE(r.status().message().find("--soc"), std::string::npos) << r.status().message();
  }
}

TEST(Estimate, LoopsCountPasses) {
  auto p = Parse(std::string(kCell) +
                 "repeat until voltage<=2.75V\ndischarge 0.5C until charge>=10% or voltage<=2.75V\nrest 10min\nend\n");
  ASSERT_TRUE(p.ok()) << Errors(p);
  PlanEstimate e = EstimatePlan(p.plan);
  // 10 % of rated per pass: the tenth pass empties the cell.
  EXPECT_EQ(e.steps[0].executions, 10);
  EXPECT_NEAR(e.total_mah, 2500, 1e-6);
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

// One repeat limit, nested counts multiplied, one message at the outer repeat.
TEST(RepeatLimit, NestedCountsMultiplyUnderOneLimit) {
  const std::string cell = "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n";
  auto ok = ParseProcedure(cell + "repeat 1000\nrepeat 1000\nrest 1s\nend\nend\n", "t", {});
  EXPECT_TRUE(ok.ok()) << (ok.errors.empty() ? "" : ok.errors[0].message);
  auto over = ParseProcedure(cell + "repeat 1000\nrepeat 1001\nrest 1s\nend\nend\n", "t", {});
  ASSERT_FALSE(over.ok());
  ASSERT_EQ(over.errors.size(), 1u);
  EXPECT_EQ(over.errors[0].line, 2);  // the outer repeat
  EXPECT_NE(over.errors[0].message.find("at most 1000000"), std::string::npos) << over.errors[0].message;
  auto single = ParseProcedure(cell + "repeat 1000001\nrest 1s\nend\n", "t", {});
  ASSERT_FALSE(single.ok());
  EXPECT_NE(single.errors[0].message.find("1000000"), std::string::npos) << single.errors[0].message;
}

// `check` multiplies nested loops: a million one-second rests take a million
// seconds, not the minute the step walk reached before it stopped.
TEST(RepeatLimit, TheEstimateMultipliesNestedLoops) {
  const std::string cell = "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n";
  auto p = ParseProcedure(cell + "repeat 1000\nrepeat 1000\nrest 1s\nend\nend\n", "t", {});
  ASSERT_TRUE(p.ok());
  PlanEstimate e = EstimatePlan(p.plan);
  EXPECT_TRUE(e.extrapolated);
  EXPECT_EQ(e.steps[0].executions, 1000000);
  EXPECT_NEAR(e.total_s, 1e6, 1.0);
  EXPECT_NE(DescribePlan(p.plan, e).find("nested repeat counts multiplied"), std::string::npos);
}

}  // namespace
}  // namespace kp
