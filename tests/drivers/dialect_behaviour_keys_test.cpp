// The dialect's behaviour keys (init, teardown, check-settings, error-query,
// strip-reply-units, mode-settle-s): read, refused with file:line and key,
// and the session's unit stripping and per-setting error check against the
// simulator's own error queue.
#include <gtest/gtest.h>

#include "drivers/inproc_transport.h"
#include "drivers/profile.h"
#include "drivers/roles.h"
#include "drivers/scpi_session.h"
#include "drivers/sim/fault_injector.h"
#include "drivers/sim/sim_bench.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

constexpr const char* kLoadCommands =
    "[commands]\ncc-select = \"FUNC CURR\"\ncc-level = \"CURR {}\"\ninput-on = \"INP ON\"\ninput-off = \"INP OFF\"\n"
    "load-read-voltage = \"MEAS:VOLT?\"\nload-read-current = \"MEAS:CURR?\"\n";

Result<InstrumentProfile> Load(const std::string& top) {
  return ParseProfile("roles = [\"load\"]\n" + top + kLoadCommands, "bench.kpd");
}

TEST(DialectKeys, BehaviourKeysAreRead) {
  auto p = Load(
      "init = [\"*CLS\", \"SYST:REM\", \"SENS:VOLT:RANG {ch}\"]\nteardown = [\"SYST:LOC\"]\ncheck-settings = true\n"
      "error-query = \"SYST:ERR:NEXT?\"\nstrip-reply-units = true\nmode-settle-s = 0.25\n");
  ASSERT_TRUE(p.ok()) << p.status().ToString();
  EXPECT_EQ(p->init, (std::vector<std::string>{"*CLS", "SYST:REM", "SENS:VOLT:RANG {ch}"}));
  EXPECT_EQ(p->teardown, std::vector<std::string>{"SYST:LOC"});
  EXPECT_TRUE(p->check_settings);
  EXPECT_EQ(p->error_query, "SYST:ERR:NEXT?");
  EXPECT_TRUE(p->strip_units);
  EXPECT_DOUBLE_EQ(p->load.mode_settle_s, 0.25);
  ApplyChannel(*p, "40");
  EXPECT_EQ(p->init[2], "SENS:VOLT:RANG 40");

  auto plain = Load("");
  ASSERT_TRUE(plain.ok());
  EXPECT_TRUE(plain->init.empty());
  EXPECT_FALSE(plain->check_settings);
  EXPECT_EQ(plain->error_query, "SYST:ERR?");
  EXPECT_EQ(plain->load.mode_settle_s, 0.0);
}

TEST(DialectKeys, RefusedWithLineAndKey) {
  struct Case {
    const char* top;
    const char* says;
  } cases[] = {
      {"init = \"*CLS\"\n", "bench.kpd:2: key 'init': a list of commands in quotes"},
      {"init = [\"*CLS\", 5]\n", "bench.kpd:2: key 'init': every command is a quoted text"},
      {"init = [\"  \"]\n", "key 'init': empty command"},
      {"init = [\"CURR {}\"]\n", "takes no number here"},
      {"init = [\"inp  on\"]\n", "'inp  on' switches the load input on; init may not"},
      {"teardown = [\"SYST:LOC\", \"INP ON\"]\n", "key 'teardown': 'INP ON' switches the load input on"},
      {"check-settings = \"yes\"\n", "key 'check-settings': must be true or false"},
      {"strip-reply-units = 1\n", "key 'strip-reply-units': must be true or false"},
      {"error-query = \"SYST:ERR\"\n", "key 'error-query': must be a query"},
      {"mode-settle-s = -1\n", "key 'mode-settle-s': must be a number of seconds from 0 to 60"},
      {"mode-settle-s = \"1s\"\n", "key 'mode-settle-s'"},
      {"inti = [\"*CLS\"]\n", "unknown key: did you mean 'init'?"},
  };
  for (const Case& c : cases) {
    auto p = Load(c.top);
    ASSERT_FALSE(p.ok()) << c.top;
    EXPECT_EQ(p.status().code(), StatusCode::kInvalidInput);
    EXPECT_NE(p.status().message().find(c.says), std::string::npos) << c.top << " -> " << p.status().message();
  }
  auto meter = ParseProfile("roles = [\"meter\"]\nmode-settle-s = 0.1\n[commands]\nmeter-read-voltage = \"MEAS:VOLT?\"\n", "m.kpd");
  ASSERT_FALSE(meter.ok());
  EXPECT_NE(meter.status().message().find("is for loads"), std::string::npos) << meter.status().message();
}

TEST(DialectKeys, ReplyUnitsAreStrippedOnlyWhenTheyAreBaseUnits) {
  struct Case {
    const char* reply;
    const char* number;
  } cases[] = {
      {"12.003 V", "12.003"}, {"1.500A", "1.500"},     {"+2.5E+00 W", "+2.5E+00"}, {"25.1 \xC2\xB0" "C", "25.1"},
      {"25.1C", "25.1"},      {"3.3 VDC", "3.3"},      {"4.7 Ohm", "4.7"},         {"9.91E37", "9.91E37"},
      {"2.5 mV", "2.5 mV"},   {"1.2 kOhm", "1.2 kOhm"}, {"300 K", "300 K"},        {"ON", "ON"},
      {"V", "V"},
  };
  for (const Case& c : cases) EXPECT_EQ(StripReplyUnit(c.reply), c.number) << c.reply;
}

// A device that replies with units, like some loads do.
class UnitReplies final : public LineDevice {
 public:
  std::optional<std::string> HandleLine(std::string_view line) override {
    if (line == "MEAS:VOLT?") return std::string("3.712 V");
    if (line == "MEAS:CURR?") return std::string("0.5 mA");
    return std::nullopt;
  }
};

TEST(DialectKeys, SessionReadsNumbersWithUnitsWhenTheDialectSaysSo) {
  VirtualClock clock;
  UnitReplies dev;
  ScpiOptions o;
  o.strip_units = true;
  o.retries = 0;
  ScpiSession s(std::make_unique<InProcTransport>(dev, clock, "unit-load"), clock, o);
  auto v = s.QueryNumber("MEAS:VOLT?");
  ASSERT_TRUE(v.ok()) << v.status().ToString();
  EXPECT_DOUBLE_EQ(v->value, 3.712);
  auto i = s.QueryNumber("MEAS:CURR?");
  ASSERT_FALSE(i.ok()) << "a prefixed unit is not guessed at";
  ScpiOptions plain;
  plain.retries = 0;
  ScpiSession p(std::make_unique<InProcTransport>(dev, clock, "unit-load"), clock, plain);
  EXPECT_FALSE(p.QueryNumber("MEAS:VOLT?").ok()) << "without the key a unit is a malformed reply";
}

TEST(DialectKeys, CheckSettingsNamesTheRefusedCommand) {
  VirtualClock clock;
  sim::SimOptions so;
  so.load_max_current_a = 2.0;  // the simulated load refuses more, -222
  sim::SimBench bench(sim::DemoLiIonCell(2.56), clock, so);
  ScpiOptions o;
  o.check_settings = true;
  ScpiSession s(std::make_unique<InProcTransport>(bench.load(), clock, "sim-load"), clock, o);
  LoadDriver load(s);
  ASSERT_OK(load.SetLevel(LoadMode::kCurrent, 1.5));
  Status refused = load.SetLevel(LoadMode::kCurrent, 3.0);
  ASSERT_FALSE(refused.ok());
  EXPECT_EQ(refused.code(), StatusCode::kInstrumentError);
  EXPECT_NE(refused.message().find("refused 'CURR +3.00000E+00': -222,\"Data out of range\""), std::string::npos)
      << refused.message();
  auto level = load.ReadLevel(LoadMode::kCurrent);
  ASSERT_TRUE(level.ok());
  EXPECT_DOUBLE_EQ(*level, 1.5) << "the refused value was not taken";

  // Error injection: the N-th setting refused though in range.
  sim::FaultOptions f;
  f.refuse_setting_at = 2;
  sim::FaultInjector faulty(bench.load(), f);
  ScpiSession fs(std::make_unique<InProcTransport>(faulty, clock, "faulty-load"), clock, o);
  ASSERT_OK(fs.Write("CURR 1.0"));
  ASSERT_OK(fs.Write("INP OFF"));  // no number: not a setting
  Status second = fs.Write("CURR 1.2");
  EXPECT_EQ(second.code(), StatusCode::kInstrumentError) << second.ToString();
  EXPECT_EQ(faulty.faults_injected(), 1);
  ASSERT_OK(fs.Write("CURR 1.3"));  // only the N-th
}

}  // namespace
}  // namespace kp
