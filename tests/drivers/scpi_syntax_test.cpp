#include "drivers/scpi_syntax.h"

#include <gtest/gtest.h>

namespace kp {
namespace {

double Value(std::string_view s) {
  auto r = ParseScpiNumber(s);
  EXPECT_TRUE(r.ok()) << s << ": " << r.status().ToString();
  return r.ok() ? r->value : -12345.0;
}

// Numeric response forms NR1, NR2, NR3 (IEEE 488.2 §8.7, from memory) and the
// decimal numeric grammar of §7.7.2 (from memory).
TEST(ScpiNumber, AcceptsNr1Nr2Nr3) {
  EXPECT_EQ(Value("42"), 42.0);
  EXPECT_EQ(Value("+42"), 42.0);
  EXPECT_EQ(Value("-7"), -7.0);
  EXPECT_EQ(Value("3.712"), 3.712);
  EXPECT_EQ(Value("-.5"), -0.5);
  EXPECT_EQ(Value("5."), 5.0);
  EXPECT_DOUBLE_EQ(Value("+3.71200E+00"), 3.712);
  EXPECT_DOUBLE_EQ(Value("1.5e-3"), 0.0015);
  EXPECT_DOUBLE_EQ(Value("  2.50000E-01\r"), 0.25);
}

TEST(ScpiNumber, RejectsMalformed) {
  for (const char* bad : {"", "   ", "abc", "1.2V", "1e", "E5", "+", ".", "1,2", "0x10", "inf", "nan", "1e999", "--1"}) {
    EXPECT_FALSE(ParseScpiNumber(bad).ok()) << "'" << bad << "'";
  }
}

// 9.9E37 is over-range / +infinity, -9.9E37 -infinity, 9.91E37 NaN (SCPI-99
// Vol 1 §7.2.1, from memory).
TEST(ScpiNumber, SpecialValuesAreNotReadings) {
  EXPECT_EQ(ParseScpiNumber("9.9E37")->kind, ScpiNumber::Kind::kOverflow);
  EXPECT_EQ(ParseScpiNumber("+9.90000E+37")->kind, ScpiNumber::Kind::kOverflow);
  EXPECT_EQ(ParseScpiNumber("-9.9E37")->kind, ScpiNumber::Kind::kUnderflow);
  EXPECT_EQ(ParseScpiNumber("9.91E37")->kind, ScpiNumber::Kind::kNotANumber);
  EXPECT_TRUE(ParseScpiNumber("9.8E37")->finite());
}

TEST(ScpiNumber, FormatNr3RoundTrips) {
  EXPECT_EQ(FormatNr3(3.712), "+3.71200E+00");
  EXPECT_EQ(FormatNr3(-0.0025), "-2.50000E-03");
  EXPECT_DOUBLE_EQ(Value(FormatNr3(0.123456)), 0.123456);
}

// Keywords: short form is the uppercase part, only exact short or long forms,
// case-insensitive, optional nodes in brackets (SCPI-99 Vol 1 ch. 6, from memory).
TEST(ScpiHeader, ShortLongOptional) {
  const char* p = "[SOURce:]CURRent[:LEVel][:IMMediate][:AMPLitude]";
  EXPECT_TRUE(ScpiHeaderMatches(p, "CURR"));
  EXPECT_TRUE(ScpiHeaderMatches(p, "curr"));
  EXPECT_TRUE(ScpiHeaderMatches(p, "SOUR:CURR"));
  EXPECT_TRUE(ScpiHeaderMatches(p, ":source:current:level"));
  EXPECT_TRUE(ScpiHeaderMatches(p, "CURR:LEV:IMM:AMPL"));
  EXPECT_TRUE(ScpiHeaderMatches(p, "CURRent:AMPLitude"));
  EXPECT_FALSE(ScpiHeaderMatches(p, "CURRE"));  // neither short nor long
  EXPECT_FALSE(ScpiHeaderMatches(p, "CUR"));
  EXPECT_FALSE(ScpiHeaderMatches(p, "CURR?"));
  EXPECT_FALSE(ScpiHeaderMatches(p, "LEV:CURR"));
  EXPECT_TRUE(ScpiHeaderMatches("MEASure:VOLTage[:DC]?", "MEAS:VOLT?"));
  EXPECT_TRUE(ScpiHeaderMatches("MEASure:VOLTage[:DC]?", "meas:volt:dc?"));
  EXPECT_FALSE(ScpiHeaderMatches("MEASure:VOLTage[:DC]?", "MEAS:VOLT"));
  EXPECT_TRUE(ScpiHeaderMatches("*IDN?", "*idn?"));
  EXPECT_FALSE(ScpiHeaderMatches("*IDN?", "*IDN"));
}

TEST(ScpiCommand, SplitsHeaderAndArguments) {
  ScpiCommand c = SplitScpiCommand("  SOUR:CURR 0.5 ");
  EXPECT_EQ(c.header, "SOUR:CURR");
  ASSERT_EQ(c.args.size(), 1u);
  EXPECT_EQ(c.args[0], "0.5");
  c = SplitScpiCommand("CONF:VOLT 10, 0.001");
  ASSERT_EQ(c.args.size(), 2u);
  EXPECT_EQ(c.args[1], "0.001");
  EXPECT_TRUE(SplitScpiCommand("*RST").args.empty());
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

// Further forms of <DECIMAL NUMERIC PROGRAM DATA> (IEEE 488.2 §7.7.2.2, from
// memory): optional sign, digits with an optional point on either side, and an
// exponent 'E'/'e' with an optional sign; and the response encodings NR1
// (integer), NR2 (fixed point) and NR3 (floating point) of §8.7.2-8.7.4 (from
// memory) that every instrument's reply takes.
TEST(ScpiNumberForms, DecimalNumericDataOf4882) {
  struct Case {
    const char* text;
    double value;
  } cases[] = {
      {"0", 0.0},          {"-0", 0.0},          {"007", 7.0},           {"+.5", 0.5},
      {"12.", 12.0},       {"1E3", 1000.0},      {"1e3", 1000.0},        {"1E+3", 1000.0},
      {"2.5E-3", 0.0025},  {"-.5E-2", -0.005},   {"+1.000000E+01", 10.0}, {"6.02E+23", 6.02e23},
      {"1.0E-300", 1e-300}, {"-3.71200E+00", -3.712},
  };
  for (const Case& c : cases) {
    auto r = ParseScpiNumber(c.text);
    ASSERT_TRUE(r.ok()) << c.text << ": " << r.status().ToString();
    EXPECT_TRUE(r->finite()) << c.text;
    EXPECT_DOUBLE_EQ(r->value, c.value) << c.text;
  }
}

// Suffixes, units, keyword forms and non-decimal radices are other data types
// (§7.7.3 suffix, §7.7.4 non-decimal numeric, from memory): a reading must not
// silently parse them.
TEST(ScpiNumberForms, RejectsOtherDataTypes) {
  for (const char* bad : {"5 V", "5mV", "#H1F", "#B101", "#Q17", "MAX", "MIN", "DEF", "1.2.3", "1E3.5", "1E+", "+-1", "1 2"}) {
    EXPECT_FALSE(ParseScpiNumber(bad).ok()) << "'" << bad << "'";
  }
}

// The over-range value may come in any numeric form (SCPI-99 Vol 1 §7.2.1,
// from memory): NR3 with padding, NR2 with trailing zeros, or as an integer.
TEST(ScpiNumberForms, OverRangeInEveryForm) {
  EXPECT_EQ(ParseScpiNumber("9.90000000E+37")->kind, ScpiNumber::Kind::kOverflow);
  EXPECT_EQ(ParseScpiNumber("99000000000000000000000000000000000000")->kind, ScpiNumber::Kind::kOverflow);
  EXPECT_EQ(ParseScpiNumber("-9.90000E+37")->kind, ScpiNumber::Kind::kUnderflow);
  EXPECT_EQ(ParseScpiNumber("+9.91000E+37")->kind, ScpiNumber::Kind::kNotANumber);
}

}  // namespace
}  // namespace kp
