// The procedure language's second edition: the spellings a technician types
// (units with a space, any case, °C, It, compound durations), one error per
// mistake with a suggestion, and the library giving the same plans as before.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <set>
#include <sstream>

#include "drivers/spelling.h"
#include "procedures/estimate.h"
#include "procedures/procedure_parser.h"
#include "procedures/units.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

const char* kCell = "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n";

ParseOutput Parse(const std::string& text) { return ParseProcedure(text, "t", {}); }
std::string Errors(const ParseOutput& p) { return FormatDiagnostics("t", p.errors); }

std::string ReadText(const std::filesystem::path& p) {
  std::ifstream in(p, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

// ------------------------------------------------------- accepted spellings ---

struct Accepted {
  const char* text;
  Dimension dim;
  double base;  // in the dimension's base unit (A, W, Ohm, V, s, mAh, Wh, degC, fraction)
};

// Every value here is the unit's definition (SI prefixes; 1 h = 3600 s; 1 d =
// 86400 s) or the C-rate's (I = C-rate × rated capacity / 1 h, IEC 61960-3
// notation It, from memory), with a rated capacity of 2500 mAh.
TEST(UnitText, AcceptedSpellings) {
  const Accepted cases[] = {
      {"600mA", Dimension::kCurrent, 0.6},
      {"600 mA", Dimension::kCurrent, 0.6},
      {"600\tmA", Dimension::kCurrent, 0.6},
      {"600ma", Dimension::kCurrent, 0.6},
      {"600MAH", Dimension::kCharge, 600.0},
      {"0.6a", Dimension::kCurrent, 0.6},
      {"0.6 A", Dimension::kCurrent, 0.6},
      {"35nA", Dimension::kCurrent, 35e-9},
      {"15uA", Dimension::kCurrent, 15e-6},
      {"15\xC2\xB5" "A", Dimension::kCurrent, 15e-6},
      {"0.2C", Dimension::kCurrent, 0.5},
      {"0.2c", Dimension::kCurrent, 0.5},
      {"0.2It", Dimension::kCurrent, 0.5},
      {"0.2 It", Dimension::kCurrent, 0.5},
      {"0.2it", Dimension::kCurrent, 0.5},
      {"2.5v", Dimension::kVoltage, 2.5},
      {"2750 mV", Dimension::kVoltage, 2.75},
      {"60degC", Dimension::kTemperature, 60.0},
      {"60 degc", Dimension::kTemperature, 60.0},
      {"60\xC2\xB0" "C", Dimension::kTemperature, 60.0},
      {"60 \xC2\xB0" "C", Dimension::kTemperature, 60.0},
      {"-20degC", Dimension::kTemperature, -20.0},
      {"3.9Ohm", Dimension::kResistance, 3.9},
      {"3.9 ohm", Dimension::kResistance, 3.9},
      {"3.9ohms", Dimension::kResistance, 3.9},
      {"1.5kOhm", Dimension::kResistance, 1500.0},
      {"1.5k\xCE\xA9", Dimension::kResistance, 1500.0},
      {"2kW", Dimension::kPower, 2000.0},
      {"2 w", Dimension::kPower, 2.0},
      {"5Wh", Dimension::kEnergy, 5.0},
      {"2.5Ah", Dimension::kCharge, 2500.0},
      {"3000mAh", Dimension::kCharge, 3000.0},
      {"10%", Dimension::kCharge, 250.0},
      {"1h30min", Dimension::kTime, 5400.0},
      {"2min30s", Dimension::kTime, 150.0},
      {"1d12h", Dimension::kTime, 129600.0},
      {"1h30min15s", Dimension::kTime, 5415.0},
      {"1:30:00", Dimension::kTime, 5400.0},
      {"0:00:02.5", Dimension::kTime, 2.5},
      {"100:00:00", Dimension::kTime, 360000.0},
      {"3d", Dimension::kTime, 259200.0},
      {"250ms", Dimension::kTime, 0.25},
      {"250 MS", Dimension::kTime, 0.25},
      {"2 H", Dimension::kTime, 7200.0},
      {"40%", Dimension::kFraction, 0.4},
      {"0.4", Dimension::kFraction, 0.4},
      {"2%/month", Dimension::kRatePerMonth, 0.02},
      {"12%/year", Dimension::kRatePerMonth, 0.01},
  };
  QuantityContext ctx;
  ctx.rated_mah = 2500.0;
  for (const Accepted& c : cases) {
    ParsedQuantity q = ParseQuantityText(c.text, c.dim, "the value", ctx);
    ASSERT_TRUE(q.value.has_value()) << c.text << ": " << q.error;
    EXPECT_NEAR(*q.value, c.base, 1e-12 * std::max(1.0, std::fabs(c.base))) << c.text;
  }
}

// -------------------------------------------------------- rejected spellings ---

struct Rejected {
  const char* text;
  Dimension dim;
  const char* message;
};

TEST(UnitText, RejectedSpellingsSayWhatToWrite) {
  const Rejected cases[] = {
      {"3000", Dimension::kCharge, "'3000' has no unit: did you mean 3000mAh?"},
      {"3", Dimension::kCharge, "'3' has no unit: did you mean 3Ah?"},
      {"600", Dimension::kCurrent, "'600' has no unit: did you mean 600mA?"},
      {"2.5", Dimension::kVoltage, "'2.5' has no unit: did you mean 2.5V?"},
      {"30", Dimension::kTime, "'30' has no unit: did you mean 30s?"},
      {"60", Dimension::kTemperature, "'60' has no unit: did you mean 60degC?"},
      {"600MA", Dimension::kCurrent, "'MA' would be mega-amperes: Kneepoint has no mega prefix; write mA for milli"},
      {"2MOhm", Dimension::kResistance, "write mOhm for milli"},
      {"5m", Dimension::kTime, "'m' is not a unit: write min for minutes or ms for milliseconds"},
      {"60C", Dimension::kTemperature, "did you mean 60degC?"},
      {"0.2C", Dimension::kCurrent, "C-rate '0.2C' needs a rated capacity"},
      {"2C", Dimension::kCharge, "C is a C-rate here"},
      {"40uV", Dimension::kCurrent, "needs a current"},
      {"25mQ", Dimension::kCurrent, "unknown unit 'mQ' in '25mQ': did you mean 'mA'?"},
      {"1h30", Dimension::kTime, "the last part has no unit"},
      {"30min1h", Dimension::kTime, "each part of a duration needs a smaller time unit"},
      {"1:30", Dimension::kTime, "is not h:mm:ss"},
      {"1:75:00", Dimension::kTime, "is not a duration h:mm:ss"},
      {"-5s", Dimension::kTime, "must not be negative"},
      {"nan", Dimension::kFraction, "not a finite number"},
      {"mA", Dimension::kCurrent, "does not start with a number"},
      {"2%", Dimension::kRatePerMonth, "has no period: did you mean 2%/month?"},
      {"2%/week", Dimension::kRatePerMonth, "unknown period 'week'"},
      {"2%/mnth", Dimension::kRatePerMonth, "did you mean 'month'?"},
      {"5 s s", Dimension::kTime, "unexpected 's' after '5 s'"},
      {"5 min-x", Dimension::kTime, "unknown unit 'min-x' in '5 min-x'"},
      {"", Dimension::kTime, "is empty"},
  };
  for (const Rejected& c : cases) {
    ParsedQuantity q = ParseQuantityText(c.text, c.dim, "the value");
    ASSERT_FALSE(q.value.has_value()) << c.text;
    EXPECT_NE(q.error.find(c.message), std::string::npos) << c.text << ": " << q.error;
    EXPECT_GE(q.error_column, 1u) << c.text;
  }
}

// ------------------------------------------------------------- suggestions ---

TEST(Spelling, ClosestWordByEditDistance) {
  EXPECT_EQ(EditDistance("dischrage", "discharge"), 1);  // a swap of neighbours is one edit
  EXPECT_EQ(EditDistance("report", "reprot"), 1);
  EXPECT_EQ(EditDistance("Voltage", "voltage"), 0);
  EXPECT_EQ(ClosestWord("dischrage", {"rest", "discharge", "charge"}), "discharge");
  EXPECT_EQ(ClosestWord("chrge", {"rest", "discharge", "charge"}), "charge");
  EXPECT_FALSE(ClosestWord("frobnicate", {"rest", "discharge", "charge"}).has_value());
  EXPECT_FALSE(ClosestWord("xy", {"rest"}).has_value());
  EXPECT_EQ(DidYouMean("evry", {"every", "log-change"}), ": did you mean 'every'?");
}

struct Slip {
  std::string text;
  int line, col;
  const char* message;
};

// One message per mistake, at the mistake, with the fix.
TEST(Language, MisspeltWordsGetOneSuggestion) {
  const std::string H = kCell;
  const Slip cases[] = {
      {H + "dischrage 1A until time>=1h", 2, 1, "unknown statement 'dischrage': did you mean 'discharge'?"},
      {H + "rset 1h", 2, 1, "did you mean 'rest'?"},
      {H + "rest 1h evry=1s", 2, 9, "unknown step option 'evry': did you mean 'every'?"},
      {H + "rest untill time>=1h", 2, 6, "unknown word 'untill': did you mean 'until'?"},
      {H + "discharge 1A until votlage<=3V", 2, 20, "unknown condition 'votlage': did you mean 'voltage'?"},
      {H + "discharge 1A until tmie>=1h", 2, 20, "did you mean 'time'?"},
      {"cell li-ion rate=2500mAh cutoff=2.75V\n", 1, 13, "unknown cell field 'rate': did you mean 'rated'?"},
      {H + "safety max-tmp=50degC", 2, 8, "unknown safety limit 'max-tmp': did you mean 'max-temp'?"},
      {H + "sample evrey=2s", 2, 8, "did you mean 'every'?"},
      {H + "duty node\nphase a 1A/1s\nend\nplay nod until time>=1h", 5, 6, "no duty named 'nod' is defined above: did you mean 'node'?"},
      {H + "discharge 600 MA until time>=1h", 2, 11, "Kneepoint has no mega prefix; write mA"},
      {"cell li-ion rated=3000 cutoff=2.75V\n" + std::string("discharge 0.2C until voltage<=2.75V\n"), 1, 19,
       "'3000' has no unit: did you mean 3000mAh?"},
  };
  for (const Slip& c : cases) {
    ParseOutput p = Parse(c.text);
    ASSERT_EQ(p.errors.size(), 1u) << c.text << "\n" << Errors(p);
    EXPECT_EQ(p.errors[0].line, c.line) << c.text << "\n" << Errors(p);
    EXPECT_EQ(p.errors[0].col, c.col) << c.text << "\n" << Errors(p);
    EXPECT_NE(p.errors[0].message.find(c.message), std::string::npos) << c.text << "\n" << Errors(p);
  }
}

// A rejected header value, block opening or keyword does not turn into errors
// on the lines that depend on it.
TEST(Language, NoCascadesFromARejectedLine) {
  const std::string H = kCell;
  const Slip cases[] = {
      // The rated capacity is refused: C-rates, percentages and the limits
      // derived from it would all be wrong; only the cell line is reported.
      {"cell li-ion rated=3000 cutoff=2.75V max=4.2V\ncharge 0.5C to 4.2V until current<=0.02C or time>=4h\n"
       "discharge 0.2C until charge>=10% or voltage<=2.75V\nrest 1h\n",
       1, 19, "has no unit"},
      // A misspelt cell line: the steps are not each told the cell is missing.
      {"cel li-ion rated=2500mAh cutoff=2.75V\ndischarge 1A until time>=1h\nrest 1h\n", 1, 1, "did you mean 'cell'?"},
      // A bad repeat count: its body and its 'end' are not errors of their own.
      {H + "repeat 3x\n  discharge 1A until time>=1h\nend\n", 2, 8, "whole number"},
      {H + "repeat 0\n  rest 1h\nend\n", 2, 8, "whole number"},
      // A bad step inside a repeat: the repeat is not called empty.
      {H + "repeat 3\n  dischrage 1A until time>=1h\nend\n", 3, 3, "did you mean 'discharge'?"},
      // A bad phase: the duty is not called empty nor unknown where it is played.
      {H + "duty node\n  phase sleep 35uQ/10s\nend\nplay node until time>=1h\n", 3, 15, "unknown unit 'uQ'"},
      // A bad duty line: its phases and end stay quiet.
      {H + "duty\n  phase sleep 35uA/10s\nend\n", 2, 5, "expected the duty pattern's name"},
      // A bad safety line: no limit checks derived from half a line.
      {H + "safety max-current=1 min-voltage=3V\ndischarge 2A until voltage<=2.75V\n", 2, 20, "'1' has no unit: did you mean 1A?"},
  };
  for (const Slip& c : cases) {
    ParseOutput p = Parse(c.text);
    ASSERT_EQ(p.errors.size(), 1u) << c.text << "\n" << Errors(p);
    EXPECT_EQ(p.errors[0].line, c.line) << c.text << "\n" << Errors(p);
    EXPECT_EQ(p.errors[0].col, c.col) << c.text << "\n" << Errors(p);
    EXPECT_NE(p.errors[0].message.find(c.message), std::string::npos) << c.text << "\n" << Errors(p);
  }
  // A C-rate in the cell line itself is its own mistake, not a silent one.
  ParseOutput self = Parse("cell li-ion rated=10% cutoff=2.75V\nrest 1h\n");
  ASSERT_EQ(self.errors.size(), 1u) << Errors(self);
  EXPECT_NE(self.errors[0].message.find("needs the rated capacity"), std::string::npos) << Errors(self);
  // Two real mistakes are still two errors.
  ParseOutput two = Parse(H + "rest 1h evry=1s\ndischarge 1A until tmie>=1h\n");
  EXPECT_EQ(two.errors.size(), 2u) << Errors(two);
}

// ------------------------------------------------ spellings in a procedure ---

// The notebook spellings and the SI ones give the same plan.
TEST(Language, NotebookSpellingsGiveTheSamePlan) {
  ParseOutput si = Parse(
      "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n"
      "safety max-temp=55degC max-time=72h\n"
      "charge 0.5C to 4.2V until current<=0.02C or time>=4h every=5s\n"
      "rest 5400s\n"
      "discharge 600mA until voltage<=2.75V or time>=3600s\n"
      "rest 7200s\n"
      "pulse 2A/10s 0A/40s until charge>=10% or voltage<=2.75V\n");
  ParseOutput notebook = Parse(
      "cell li-ion rated=2500 mAh nominal=3.6 v max=4.2V cutoff=2.75 V max-temp=60\xC2\xB0" "C\n"
      "safety max-temp=55 degC max-time=3d\n"
      "charge 0.5It to 4.2v until current<=0.02 It or time>=4 h every=5 s\n"
      "rest 1h30min\n"
      "discharge 600 mA until voltage<=2.75 V or time>=1:00:00\n"
      "rest 2 H\n"
      "pulse 2A/10s 0a/40 s until charge>=10 % or voltage<=2750mV\n");
  ASSERT_TRUE(si.ok()) << Errors(si);
  ASSERT_TRUE(notebook.ok()) << Errors(notebook);
  ASSERT_EQ(si.plan.steps.size(), notebook.plan.steps.size());
  EXPECT_DOUBLE_EQ(notebook.plan.cell.rated_mah, 2500);
  EXPECT_DOUBLE_EQ(notebook.plan.cell.max_temp_c, 60);
  EXPECT_DOUBLE_EQ(notebook.plan.limits.max_total_s, 3 * 86400.0);
  EXPECT_DOUBLE_EQ(si.plan.limits.max_total_s, 72 * 3600.0);
  for (size_t i = 0; i < si.plan.steps.size(); ++i) {
    const Step& a = si.plan.steps[i];
    const Step& b = notebook.plan.steps[i];
    EXPECT_EQ(a.kind, b.kind) << i;
    EXPECT_DOUBLE_EQ(a.current_a, b.current_a) << i;
    EXPECT_DOUBLE_EQ(a.charge_current_a, b.charge_current_a) << i;
    EXPECT_DOUBLE_EQ(a.charge_voltage_v, b.charge_voltage_v) << i;
    EXPECT_DOUBLE_EQ(a.sample_period_s, b.sample_period_s) << i;
    EXPECT_EQ(a.end.time_s, b.end.time_s) << i;
    EXPECT_EQ(a.end.voltage_below_v, b.end.voltage_below_v) << i;
    EXPECT_EQ(a.end.current_below_a, b.end.current_below_a) << i;
    EXPECT_EQ(a.end.charge_mah, b.end.charge_mah) << i;
    ASSERT_EQ(a.segments.size(), b.segments.size());
    for (size_t k = 0; k < a.segments.size(); ++k) {
      EXPECT_DOUBLE_EQ(a.segments[k].level, b.segments[k].level);
      EXPECT_DOUBLE_EQ(a.segments[k].duration_s, b.segments[k].duration_s);
    }
  }
  EXPECT_DOUBLE_EQ(*notebook.plan.steps[1].end.time_s, 5400.0);
  EXPECT_DOUBLE_EQ(notebook.plan.steps[0].charge_current_a, 1.25);
}

// The older words of the duty block are still read (stored runs are rebuilt
// from their text), with a warning naming the new word.
TEST(Language, OlderDutyWordsAreReadWithAWarning) {
  ParseOutput p = Parse(std::string(kCell) + "profile node\n  phase a 1A/1s\n  phase b 0A/9s\nend\ncycle node until time>=1h\n");
  ASSERT_TRUE(p.ok()) << Errors(p);
  ASSERT_EQ(p.warnings.size(), 2u);
  EXPECT_NE(p.warnings[0].message.find("'profile' is the older name of 'duty'"), std::string::npos);
  EXPECT_NE(p.warnings[1].message.find("'cycle' is the older name of 'play'"), std::string::npos);
  ASSERT_EQ(p.plan.steps.size(), 1u);
  EXPECT_EQ(p.plan.steps[0].kind, StepKind::kDutyCycle);
  EXPECT_EQ(p.plan.steps[0].profile_name, "node");
}

TEST(Language, DutyBlocksAreReadOnTheirOwn) {
  auto only = ReadDutyPatterns("# a node\nduty node\n  phase sleep 8uA/599.5s\n  phase report 25mA/0.5s\nend\n", "n.kpp");
  ASSERT_TRUE(only.ok()) << only.status().message();
  ASSERT_EQ(only->size(), 1u);
  EXPECT_EQ((*only)[0].name, "node");
  EXPECT_EQ((*only)[0].line, 2);
  ASSERT_EQ((*only)[0].phases.size(), 2u);
  EXPECT_DOUBLE_EQ((*only)[0].phases[0].level, 8e-6);
  EXPECT_DOUBLE_EQ((*only)[0].phases[0].real_duration_s, 599.5);
  auto none = ReadDutyPatterns("# nothing\n", "n.kpp");
  ASSERT_FALSE(none.ok());
  EXPECT_NE(none.status().message().find("no 'duty' block"), std::string::npos);
  auto bad = ReadDutyPatterns("duty node\n  phase sleep 8uA/10\nend\n", "n.kpp");
  ASSERT_FALSE(bad.ok());
  EXPECT_NE(bad.status().message().find("n.kpp:2:"), std::string::npos) << bad.status().message();
}

// ----------------------------------------------------------------- library ---

void ExpectSameEnd(const EndConditions& a, const EndConditions& b, const std::string& where) {
  EXPECT_EQ(a.voltage_below_v, b.voltage_below_v) << where;
  EXPECT_EQ(a.voltage_above_v, b.voltage_above_v) << where;
  EXPECT_EQ(a.current_below_a, b.current_below_a) << where;
  EXPECT_EQ(a.time_s, b.time_s) << where;
  EXPECT_EQ(a.charge_mah, b.charge_mah) << where;
  EXPECT_EQ(a.energy_wh, b.energy_wh) << where;
  EXPECT_EQ(a.temperature_above_c, b.temperature_above_c) << where;
}

// Every library and demo procedure, as written before this edition of the
// language (tests/procedures/legacy/, verbatim copies), against its current
// file: both parse, the current one without warnings, and they give the same
// plan (every number of the cell, limits, steps, segments, loops) and the
// same estimates. The legacy copies go through the same parser, so what this
// checks is that rewriting a file in the new words changes nothing.
TEST(Library, NewSpellingsGiveTheSamePlans) {
  const std::filesystem::path legacy = testing::SourcePath("tests/procedures/legacy");
  const std::filesystem::path library = testing::SourcePath("procedures/library");
  int files = 0;
  for (const auto& entry : std::filesystem::recursive_directory_iterator(legacy)) {
    if (entry.path().extension() != ".kpp") continue;
    const std::filesystem::path rel = std::filesystem::relative(entry.path(), legacy);
    const std::filesystem::path now = library / rel;
    ASSERT_TRUE(std::filesystem::exists(now)) << rel << " is gone from the library";
    ++files;
    const std::string where = rel.string();
    ParseOutput old_p = Parse(ReadText(entry.path()));
    ParseOutput new_p = Parse(ReadText(now));
    ASSERT_TRUE(old_p.ok()) << where << "\n" << Errors(old_p);
    ASSERT_TRUE(new_p.ok()) << where << "\n" << Errors(new_p);
    EXPECT_TRUE(new_p.warnings.empty()) << where << ": " << new_p.warnings[0].message;
    for (const Diagnostic& w : old_p.warnings) EXPECT_NE(w.message.find("older name"), std::string::npos) << w.message;
    const Plan& a = old_p.plan;
    const Plan& b = new_p.plan;
    EXPECT_EQ(a.name, b.name) << where;
    EXPECT_EQ(a.cell.chemistry, b.cell.chemistry) << where;
    EXPECT_EQ(a.cell.rated_mah, b.cell.rated_mah) << where;
    EXPECT_EQ(a.cell.nominal_v, b.cell.nominal_v) << where;
    EXPECT_EQ(a.cell.max_v, b.cell.max_v) << where;
    EXPECT_EQ(a.cell.cutoff_v, b.cell.cutoff_v) << where;
    EXPECT_EQ(a.cell.max_temp_c, b.cell.max_temp_c) << where;
    EXPECT_EQ(a.limits.max_temp_c, b.limits.max_temp_c) << where;
    EXPECT_EQ(a.limits.min_voltage_v, b.limits.min_voltage_v) << where;
    EXPECT_EQ(a.limits.max_voltage_v, b.limits.max_voltage_v) << where;
    EXPECT_EQ(a.limits.max_current_a, b.limits.max_current_a) << where;
    EXPECT_EQ(a.limits.max_total_s, b.limits.max_total_s) << where;
    EXPECT_EQ(a.limits.max_charge_mah, b.limits.max_charge_mah) << where;
    EXPECT_EQ(a.limits.over_temp_action, b.limits.over_temp_action) << where;
    ASSERT_EQ(a.steps.size(), b.steps.size()) << where;
    for (size_t i = 0; i < a.steps.size(); ++i) {
      const Step& x = a.steps[i];
      const Step& y = b.steps[i];
      std::string w = where + " step " + std::to_string(i + 1);
      EXPECT_EQ(x.kind, y.kind) << w;
      EXPECT_EQ(x.current_a, y.current_a) << w;
      EXPECT_EQ(x.power_w, y.power_w) << w;
      EXPECT_EQ(x.resistance_ohm, y.resistance_ohm) << w;
      EXPECT_EQ(x.charge_current_a, y.charge_current_a) << w;
      EXPECT_EQ(x.charge_voltage_v, y.charge_voltage_v) << w;
      EXPECT_EQ(x.sample_period_s, y.sample_period_s) << w;
      EXPECT_EQ(x.log_change_v, y.log_change_v) << w;
      EXPECT_EQ(x.log_max_gap_s, y.log_max_gap_s) << w;
      EXPECT_EQ(x.profile_name, y.profile_name) << w;
      EXPECT_EQ(x.source_line, y.source_line) << w;
      ExpectSameEnd(x.end, y.end, w);
      ASSERT_EQ(x.segments.size(), y.segments.size()) << w;
      for (size_t k = 0; k < x.segments.size(); ++k) {
        EXPECT_EQ(x.segments[k].name, y.segments[k].name) << w;
        EXPECT_EQ(x.segments[k].mode, y.segments[k].mode) << w;
        EXPECT_EQ(x.segments[k].level, y.segments[k].level) << w;
        EXPECT_EQ(x.segments[k].duration_s, y.segments[k].duration_s) << w;
        EXPECT_EQ(x.segments[k].real_duration_s, y.segments[k].real_duration_s) << w;
      }
    }
    ASSERT_EQ(a.loops.size(), b.loops.size()) << where;
    for (size_t i = 0; i < a.loops.size(); ++i) {
      EXPECT_EQ(a.loops[i].first_step, b.loops[i].first_step) << where;
      EXPECT_EQ(a.loops[i].last_step, b.loops[i].last_step) << where;
      EXPECT_EQ(a.loops[i].count, b.loops[i].count) << where;
      ExpectSameEnd(a.loops[i].until, b.loops[i].until, where + " loop");
    }
    PlanEstimate ea = EstimatePlan(a);
    PlanEstimate eb = EstimatePlan(b);
    EXPECT_EQ(ea.total_s, eb.total_s) << where;
    EXPECT_EQ(ea.total_mah, eb.total_mah) << where;
    EXPECT_EQ(ea.complete, eb.complete) << where;
    ASSERT_EQ(ea.steps.size(), eb.steps.size());
    for (size_t i = 0; i < ea.steps.size(); ++i) {
      EXPECT_EQ(ea.steps[i].duration_s, eb.steps[i].duration_s) << where;
      EXPECT_EQ(ea.steps[i].charge_mah, eb.steps[i].charge_mah) << where;
    }
  }
  // Every shipped file has its legacy copy (and so is covered here).
  int shipped = 0;
  for (const auto& entry : std::filesystem::recursive_directory_iterator(library))
    if (entry.path().extension() == ".kpp") ++shipped;
  EXPECT_EQ(files, shipped);
  EXPECT_GE(files, 19);
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

// Every example in procedures/LANGUAGE.md (the ```text blocks) checks clean,
// without warnings; the cycling example is a 50-pass repeat that fits its
// own max-time.
TEST(Language, ExamplesInTheReferenceCheckClean) {
  std::string doc = ReadText(testing::SourcePath("procedures/LANGUAGE.md"));
  int examples = 0;
  bool cycling = false;
  for (size_t at = doc.find("```text\n"); at != std::string::npos; at = doc.find("```text\n", at + 1)) {
    size_t begin = at + 8;
    size_t end = doc.find("```", begin);
    ASSERT_NE(end, std::string::npos);
    std::string text = doc.substr(begin, end - begin);
    ParseOutput p = ParseProcedure(text, "LANGUAGE.md", {});
    ASSERT_TRUE(p.ok()) << text << "\n" << FormatDiagnostics("LANGUAGE.md", p.errors);
    EXPECT_TRUE(p.warnings.empty()) << text;
    PlanEstimate e = EstimatePlan(p.plan);
    EXPECT_TRUE(e.complete) << text;
    EXPECT_LE(e.total_s, p.plan.limits.max_total_s) << text;
    if (p.plan.loops.size() == 1 && p.plan.loops[0].count == 50) {
      cycling = true;
      EXPECT_EQ(p.plan.steps.front().kind, StepKind::kCharge);
      EXPECT_EQ(e.steps.front().executions, 50);
    }
    ++examples;
  }
  EXPECT_GE(examples, 2);
  EXPECT_TRUE(cycling) << "the cycling example is gone from LANGUAGE.md";
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

// The fuzz seeds of this edition are what they claim: the spellings and the
// duty/play files check clean, the file of slips gives one error per line.
TEST(Language, FuzzSeedsOfTheNewSyntax) {
  const std::filesystem::path dir = testing::SourcePath("tests/fuzz/corpus/procedure");
  for (const char* name : {"notebook-spellings.kpp", "duty-play.kpp", "cycling.kpp"}) {
    ParseOutput p = ParseProcedure(ReadText(dir / name), name, {});
    EXPECT_TRUE(p.ok()) << name << "\n" << FormatDiagnostics(name, p.errors);
  }
  std::string slips = ReadText(dir / "slips.kpp");
  ParseOutput p = ParseProcedure(slips, "slips", {});
  std::set<int> lines;
  for (const Diagnostic& d : p.errors) EXPECT_TRUE(lines.insert(d.line).second) << "two errors on line " << d.line << "\n"
                                                                                  << FormatDiagnostics("slips.kpp", p.errors);
  EXPECT_GE(p.errors.size(), 8u) << FormatDiagnostics("slips.kpp", p.errors);
}

}  // namespace
}  // namespace kp
