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
