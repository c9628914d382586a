// Input limits: overlong lines, oversized files and out-of-range numbers
// (1e308 A, negative durations, NaN, infinity) are refused with a message
// naming the file and line (and column where there is one) by the procedure
// parser, the rig file and profile loaders and the command line's quantities.
#include <gtest/gtest.h>

#include <fstream>
#include <string>

#include "drivers/profile.h"
#include "drivers/text_limits.h"
#include "procedures/procedure_parser.h"
#include "procedures/units.h"
#include "rig/rig_file.h"
#include "tests/support/test_support.h"
#include "ui/cli/procedure_file.h"

namespace kp {
namespace {

const char* kCell = "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n";

std::string ProcedureError(const std::string& body) {
  Result<Plan> r = CompileProcedure(std::string(kCell) + body, "limits.kpp");
  return r.ok() ? "accepted" : r.status().message();
}

TEST(InputLimits, ProcedureRefusesOutOfRangeNumbersWithFileLineCol) {
  // 1e308 written out: finite for strtod, far beyond any bench.
  std::string huge = "1" + std::string(308, '0');
  EXPECT_NE(ProcedureError("discharge " + huge + "A until voltage<=3V\n").find("limits.kpp:2:11: number '1"),
            std::string::npos);
  EXPECT_NE(ProcedureError("discharge 1e308A until voltage<=3V\n").find("limits.kpp:2:11:"), std::string::npos);
  EXPECT_NE(ProcedureError("discharge 2000000000mA until voltage<=3V\n").find("out of range"), std::string::npos);
  EXPECT_NE(ProcedureError("rest -5min\n").find("limits.kpp:2:6: the rest duration must be greater than zero"),
            std::string::npos);
  EXPECT_NE(ProcedureError("discharge 1A until time>=-5min\n").find("limits.kpp:2:26:"), std::string::npos);
  EXPECT_NE(ProcedureError("rest nanmin\n").find("limits.kpp:2:"), std::string::npos);
  EXPECT_NE(ProcedureError("rest infs\n").find("limits.kpp:2:"), std::string::npos);
  // Within range still parses.
  EXPECT_EQ(ProcedureError("discharge 1A until voltage<=3V\n"), "accepted");
}

TEST(InputLimits, ProcedureRefusesOverlongLinesAndOversizedText) {
  std::string body = "rest 5min\n# " + std::string(kMaxTextLineBytes, 'x') + "\nrest 1min\n";
  EXPECT_NE(ProcedureError(body).find("limits.kpp:3:4097: line is 4098 bytes long; the limit is 4096 bytes"),
            std::string::npos)
      << ProcedureError(body);
  // A line exactly at the limit is fine.
  EXPECT_EQ(ProcedureError("rest 5min #" + std::string(kMaxTextLineBytes - 11, 'x') + "\n"), "accepted");
  std::string big(kMaxTextFileBytes + 1, '\n');
  EXPECT_NE(ProcedureError(big).find("limits.kpp:1:1: the procedure is"), std::string::npos);
  // The file reader refuses an oversized file before reading it.
  testing::TempDir dir;
  const std::string path = dir.File("big.kpp");
  {
    std::ofstream out(path);
    out << kCell << std::string(kMaxTextFileBytes, '#') << "\n";
  }
  auto r = cli::LoadProcedure(path, {});
  ASSERT_FALSE(r.ok());
  EXPECT_NE(r.status().message().find(path + ":1:1: not a procedure file"), std::string::npos) << r.status().message();
}

std::string RigError(const std::string& bench_extra, const std::string& instrument_extra = "") {
  std::string t = "[bench]\nname = \"b\"\n" + bench_extra +
                  "\n[[instrument]]\nname = \"l\"\naddress = \"tcp:127.0.0.1:5025\"\nprofile = \"kneepoint-sim\"\n"
                  "roles = [\"load\", \"thermometer\"]\n" +
                  instrument_extra + "\n";
  auto r = ParseRigFile(t, "limits.toml");
  return r.ok() ? "accepted" : r.status().message();
}

TEST(InputLimits, RigFileRefusesOutOfRangeNumbersNamingFileLineAndKey) {
  EXPECT_EQ(RigError(""), "accepted");
  EXPECT_NE(RigError("max_current_a = 1e308").find("limits.toml:3: key 'bench.max_current_a'"), std::string::npos);
  EXPECT_NE(RigError("max_current_a = nan").find("limits.toml:3: key 'bench.max_current_a': nan"), std::string::npos);
  EXPECT_NE(RigError("max_voltage_v = inf").find("limits.toml:3: key 'bench.max_voltage_v': inf"), std::string::npos);
  EXPECT_NE(RigError("clock_speed = -1.0").find("limits.toml:3: key 'bench.clock_speed'"), std::string::npos);
  EXPECT_NE(RigError("", "timeout_s = -2.0").find("limits.toml:9: key 'instrument[1].timeout_s'"), std::string::npos);
  EXPECT_NE(RigError("", "late_reply_s = nan").find("limits.toml:9: key 'instrument[1].late_reply_s'"), std::string::npos);
  EXPECT_NE(RigError("", "voltage_gain = inf").find("limits.toml:9: key 'instrument[1].voltage_gain'"), std::string::npos);
}

TEST(InputLimits, RigFileAndProfileRefuseOverlongLinesAndOversizedFiles) {
  std::string rig_long = RigError("# " + std::string(kMaxTextLineBytes, 'x'));
  EXPECT_NE(rig_long.find("limits.toml:3:4097: line is"), std::string::npos) << rig_long;
  auto p = ParseProfile("roles = [\"load\"]\ndescription = \"" + std::string(kMaxTextLineBytes, 'x') + "\"\n", "limits.kpd");
  ASSERT_FALSE(p.ok());
  EXPECT_NE(p.status().message().find("limits.kpd:2:4097: line is"), std::string::npos) << p.status().message();

  testing::TempDir dir;
  const std::string rig_path = dir.File("big.toml");
  const std::string prof_path = dir.File("big.kpd");
  for (const std::string& path : {rig_path, prof_path}) {
    std::ofstream out(path);
    for (size_t i = 0; i < kMaxTextFileBytes / 64 + 1; ++i) out << "# " << std::string(62, 'x') << "\n";
  }
  auto r = LoadRigFile(rig_path);
  ASSERT_FALSE(r.ok());
  EXPECT_NE(r.status().message().find(rig_path + ":1:1: rig file is"), std::string::npos) << r.status().message();
  auto pf = LoadProfileFile(prof_path);
  ASSERT_FALSE(pf.ok());
  EXPECT_NE(pf.status().message().find(prof_path + ":1:1: dialect is"), std::string::npos) << pf.status().message();
}

TEST(InputLimits, CommandLineQuantitiesRefuseNanInfinityAndAbsurdValuesWithColumn) {
  struct Case {
    const char* text;
    Dimension kind;
    const char* message;
  };
  const Case cases[] = {
      {"1e308A", Dimension::kCurrent, "out of range"},   {"20000A", Dimension::kCurrent, "out of range"},
      {"nanA", Dimension::kCurrent, "not a finite"},     {" nan", Dimension::kFraction, "not a finite"},
      {"infs", Dimension::kTime, "not a finite"},    {"inf", Dimension::kFraction, "not a finite"},
      {"-5s", Dimension::kTime, "must not be negative"}, {"-2mAh", Dimension::kCharge, "must not be negative"},
      {"1e400mAh", Dimension::kCharge, "not a finite"},
  };
  for (const Case& c : cases) {
    ParsedQuantity q = ParseQuantityText(c.text, c.kind);
    EXPECT_FALSE(q.value.has_value()) << c.text;
    EXPECT_NE(q.error.find(c.message), std::string::npos) << c.text << ": " << q.error;
    EXPECT_GE(q.error_column, 1u) << c.text;
  }
  EXPECT_EQ(ParseQuantityText(" nan", Dimension::kFraction).error_column, 2u);
  ASSERT_TRUE(ParseQuantityText("9999A", Dimension::kCurrent).value.has_value());
  EXPECT_EQ(*ParseQuantityText("250mA", Dimension::kCurrent).value, 0.25);
}

}  // namespace
}  // namespace kp
