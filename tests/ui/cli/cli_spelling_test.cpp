// The command line as a technician types it: units on every physical value
// (bare numbers refused with the fix), suggestions for misspelt commands and
// options, and instrument addresses without their prefixes.
#include <gtest/gtest.h>

#include <fstream>
#include <string>
#include <vector>

#include "drivers/address.h"
#include "drivers/sim/sim_bench.h"
#include "drivers/sim/sim_server.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"
#include "ui/cli/cli.h"

namespace kp {
namespace {

using testing::CliResult;
CliResult Cli(std::vector<std::string> args) { return testing::RunKneepointCaptured(std::move(args)); }

TEST(CommandLine, MisspeltCommandsAndOptionsGetASuggestion) {
  CliResult cmd = Cli({"reprot", "1"});
  EXPECT_EQ(cmd.code, cli::kExitBadInput);
  EXPECT_NE(cmd.err.find("unknown command 'reprot': did you mean 'report'?"), std::string::npos) << cmd.err;
  CliResult chk = Cli({"chek", "x.kpp"});
  EXPECT_NE(chk.err.find("did you mean 'check'?"), std::string::npos) << chk.err;
  CliResult opt = Cli({"check", "x.kpp", "--min-smaple", "20ms"});
  EXPECT_EQ(opt.code, cli::kExitBadInput);
  EXPECT_NE(opt.err.find("unknown option '--min-smaple' of 'check': did you mean '--min-sample'?"), std::string::npos)
      << opt.err;
  CliResult far = Cli({"frobnicate"});
  EXPECT_EQ(far.code, cli::kExitBadInput);
  EXPECT_EQ(far.err.find("did you mean"), std::string::npos) << far.err;
}

// Every option that takes a physical value takes a unit; a bare number is
// refused with the unit it probably lacks.
TEST(CommandLine, PhysicalOptionsTakeUnits) {
  struct Case {
    std::vector<std::string> args;
    const char* message;
  } cases[] = {
      {{"check", "x.kpp", "--min-sample", "0.02"}, "'0.02' has no unit: did you mean 0.02s?"},
      {{"report", "1", "--brownout", "3"}, "'3' has no unit: did you mean 3V?"},
      {{"report", "1", "--dcir-delay", "1"}, "'1' has no unit: did you mean 1s?"},
      {{"report", "1", "--dcir-min-step", "50"}, "'50' has no unit: did you mean 50mA?"},
      {{"sim", "--capacity", "2.56"}, "'2.56' has no unit: did you mean 2.56Ah?"},
      {{"probe", "tcp:127.0.0.1:1", "--timeout", "2"}, "'2' has no unit: did you mean 2s?"},
      {{"run", "x.kpp", "--rig", "sim", "--db", "x.db", "--sim-ambient", "0"}, "'0' has no unit: did you mean 0degC?"},
      {{"run", "x.kpp", "--rig", "sim", "--db", "x.db", "--link-grace", "30"}, "did you mean 30s?"},
      {{"run", "x.kpp", "--rig", "sim", "--db", "x.db", "--progress", "60"}, "did you mean 60s?"},
      {{"run", "x.kpp", "--rig", "sim", "--db", "x.db", "--sim-ambient", "60C"}, "did you mean 60degC?"},
      {{"run", "x.kpp", "--rig", "sim", "--db", "x.db", "--link-grace", "2h"}, "outside 0 ms .. 1 h"},
      {{"life", "--capacity", "3000", "--average", "40uA"}, "'3000' has no unit: did you mean 3000mAh?"},
      {{"compare", "1", "2", "--at", "750"}, "'750' has no unit: did you mean 750mA?"},
  };
  for (const Case& c : cases) {
    CliResult r = Cli(c.args);
    EXPECT_EQ(r.code, cli::kExitBadInput) << c.args[0] << " " << r.err;
    EXPECT_NE(r.err.find(c.message), std::string::npos) << c.args[0] << ": " << r.err;
  }
}

// The values a notebook holds are read: check prints its plan with the
// spellings of the new edition on its command line.
TEST(CommandLine, UnitsWithSpacesAndOtherCase) {
  testing::TempDir dir;
  std::string proc = dir.File("p.kpp");
  std::ofstream(proc) << "cell li-ion rated=2500 mAh cutoff=2.75v max=4.2 V\ndischarge 0.2It until voltage<=2.75V\n";
  CliResult r = Cli({"check", proc, "--min-sample", "20 ms", "--soc", "40 %"});
  EXPECT_EQ(r.code, cli::kExitOk) << r.err;
  EXPECT_NE(r.out.find("~2:00:00"), std::string::npos) << r.out;  // 40 % of 2500 mAh at 0.5 A
}

// `probe` on a bare device path (serial with the defaults), on HOST:PORT
// without the prefix, and on an IPv6 literal in brackets.
TEST(CommandLine, ProbeTakesShortAddresses) {
  VirtualClock clock;
  sim::SimBench bench(sim::DemoLiIonCell(2.56), clock);
  auto pty = sim::SimServer::Start(*ParseAddress("pty"), {{"load", &bench.load()}});
  ASSERT_TRUE(pty.ok()) << pty.status().message();
  std::string serial = (*pty)->client_addresses()[0];
  ASSERT_EQ(serial.rfind("serial:", 0), 0u) << serial;
  std::string bare = serial.substr(7, serial.find('?') == std::string::npos ? std::string::npos : serial.find('?') - 7);
  CliResult r = Cli({"probe", bare, "--timeout", "2s"});
  EXPECT_EQ(r.code, cli::kExitOk) << r.err;
  EXPECT_NE(r.out.find(bare), std::string::npos) << r.out;

  auto tcp = sim::SimServer::Start(*ParseAddress("tcp:127.0.0.1:0"), {{"load", &bench.load()}});
  ASSERT_TRUE(tcp.ok());
  std::string addr = (*tcp)->client_addresses()[0];
  CliResult t = Cli({"probe", addr.substr(4)});  // "127.0.0.1:PORT"
  EXPECT_EQ(t.code, cli::kExitOk) << t.err;

  auto v6 = sim::SimServer::Start(*ParseAddress("tcp:[::1]:0"), {{"load", &bench.load()}});
  if (!v6.ok()) GTEST_SKIP() << "no IPv6 loopback here: " << v6.status().message();
  std::string a6 = (*v6)->client_addresses()[0];
  EXPECT_EQ(a6.rfind("tcp:[::1]:", 0), 0u) << a6;
  CliResult s = Cli({"probe", a6});
  EXPECT_EQ(s.code, cli::kExitOk) << s.err;
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

// `check` on an instrument dialect checks it as one (and says so), and an
// older-format dialect named .kpp is not reported as a broken procedure.
TEST(CommandLine, CheckKnowsADialectFromAProcedure) {
  std::string shipped = testing::SourcePath("drivers/profiles/generic-scpi-load.kpd").string();
  CliResult ok = Cli({"check", shipped});
  EXPECT_EQ(ok.code, cli::kExitOk) << ok.err;
  EXPECT_NE(ok.out.find("instrument dialect for load"), std::string::npos) << ok.out;
  testing::TempDir dir;
  std::string old = dir.File("my-load.kpp");
  std::ofstream(old) << "# my load\nroles = load\ncc-select = FUNC CURR\n";
  CliResult r = Cli({"check", old});
  EXPECT_EQ(r.code, cli::kExitBadInput);
  EXPECT_NE(r.err.find("older 'key = text' format; dialects are TOML files now (.kpd)"), std::string::npos) << r.err;
  EXPECT_EQ(r.err.find("cell"), std::string::npos) << "no procedure errors for a dialect: " << r.err;
}

}  // namespace
}  // namespace kp
