// The report, compare and life commands end to end through the command line.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "drivers/sim/cell_model.h"
#include "procedures/plan.h"
#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "tests/analysis/xml_check.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"
#include "ui/cli/cli.h"

namespace kp {
namespace {

using testing::CliResult;
CliResult Cli(std::vector<std::string> args) { return testing::RunKneepointCaptured(std::move(args)); }

std::string ReadFile(const std::string& path) {
  std::ifstream f(path);
  std::stringstream ss;
  ss << f.rdbuf();
  return ss.str();
}

// 2,000 mAh at 40 µA: 50,000 h ≈ 5.7 years (Q = I·t, common practice, no source).
TEST(LifeCli, WorkedExampleAsJson) {
  CliResult r = Cli({"life", "--capacity", "2000mAh", "--average", "40uA", "--json"});
  ASSERT_EQ(r.code, 0) << r.err;
  auto j = nlohmann::json::parse(r.out);
  EXPECT_NEAR(j["average_current_A"].get<double>(), 40e-6, 1e-15);
  EXPECT_NEAR(j["hours"].get<double>(), 50000.0, 1e-6);
  EXPECT_NEAR(j["years"].get<double>(), 5.7, 0.01);
  EXPECT_TRUE(j["allowances"].empty());
}

// Duty-cycle average (time-weighted mean, common practice, no source):
// 8 µA for 599.5 s + 25 mA for 0.5 s ≈ 28.8 µA. The profile is a procedure's
// duty block, read from a file holding only the block or from a procedure by name.
TEST(LifeCli, DutyBlockAndAllowances) {
  testing::TempDir dir;
  std::string path = dir.File("node.kpp");
  std::ofstream(path) << "# sensor node\nduty node\n  phase sleep 8uA/599.5s\n  phase report 25mA/0.5s\nend\n";
  CliResult r = Cli({"life", "--capacity", "2000mAh", "--duty", path, "--self-discharge", "2%/month", "--json"});
  ASSERT_EQ(r.code, 0) << r.err;
  auto j = nlohmann::json::parse(r.out);
  const double average_a = (8e-6 * 599.5 + 0.025 * 0.5) / 600.0;
  EXPECT_NEAR(j["average_current_A"].get<double>(), average_a, 1e-15);
  ASSERT_EQ(j["allowances"].size(), 1u);
  EXPECT_EQ(j["allowances"][0], "self-discharge");
  EXPECT_LT(j["hours"].get<double>(), 2.0 / j["average_current_A"].get<double>());

  // The same block inside a whole procedure, compressed for the test: life
  // takes the real durations, named after the file as FILE:NAME.
  std::string proc = dir.File("field.kpp");
  std::ofstream(proc) << "cell li-ion rated=2500mAh cutoff=2.75V max=4.2V\n"
                         "duty other\n  phase on 1A/1s\nend\n"
                         "duty node\n  phase sleep 8uA/599.5s\n  phase report 25mA/0.5s\nend\n"
                         "play node compress=5s until voltage<=2.75V\n";
  CliResult named = Cli({"life", "--capacity", "2000mAh", "--profile", proc + ":node", "--json"});
  ASSERT_EQ(named.code, 0) << named.err;
  EXPECT_NEAR(nlohmann::json::parse(named.out)["average_current_A"].get<double>(), average_a, 1e-15);
  CliResult two = Cli({"life", "--capacity", "2000mAh", "--duty", proc});
  EXPECT_EQ(two.code, cli::kExitBadInput);
  EXPECT_NE(two.err.find("holds 2 duty blocks (other, node)"), std::string::npos) << two.err;
  CliResult missing = Cli({"life", "--capacity", "2000mAh", "--duty", proc + ":nod"});
  EXPECT_EQ(missing.code, cli::kExitBadInput);
  EXPECT_NE(missing.err.find("did you mean 'node'?"), std::string::npos) << missing.err;

  std::ofstream(path) << "duty node\n  phase sleep 8uA/599.5s\n  phase report 25 mA/half\nend\n";
  CliResult bad = Cli({"life", "--capacity", "2000mAh", "--duty", path});
  EXPECT_EQ(bad.code, cli::kExitBadInput);
  EXPECT_NE(bad.err.find("node.kpp:3:"), std::string::npos) << bad.err;

  // The older second syntax gets one message that shows the block to write.
  std::ofstream(path) << "compress 100\n8uA for 599.5s compressed\n25mA for 0.5s\n";
  CliResult old = Cli({"life", "--capacity", "2000mAh", "--profile", path});
  EXPECT_EQ(old.code, cli::kExitBadInput);
  EXPECT_NE(old.err.find("older duty syntax"), std::string::npos) << old.err;
  EXPECT_NE(old.err.find("phase sleep 8uA/599.5s"), std::string::npos) << old.err;

  CliResult unit = Cli({"life", "--capacity", "2000mV", "--average", "40uA"});
  EXPECT_EQ(unit.code, cli::kExitBadInput);
  EXPECT_NE(unit.err.find("--capacity"), std::string::npos);
  CliResult bare = Cli({"life", "--capacity", "3000", "--average", "40uA"});
  EXPECT_EQ(bare.code, cli::kExitBadInput);
  EXPECT_NE(bare.err.find("'3000' has no unit: did you mean 3000mAh?"), std::string::npos) << bare.err;
}

// Peukert derating (Peukert 1897, C_p = I^k t): a capacity Q measured at I_ref
// becomes Q (I_ref / I)^(k-1) at current I.
TEST(LifeCli, PeukertDerating) {
  CliResult r =
      Cli({"life", "--capacity", "2000mAh", "--average", "100mA", "--peukert", "1.2", "--measured-at", "400mA", "--json"});
  ASSERT_EQ(r.code, 0) << r.err;
  auto j = nlohmann::json::parse(r.out);
  double q = 2000.0 * std::pow(0.4 / 0.1, 0.2);
  EXPECT_NEAR(j["capacity_mAh"].get<double>(), q, 1e-9);
  EXPECT_NEAR(j["hours"].get<double>(), q / 100.0, 1e-9);
  ASSERT_EQ(j["allowances"].size(), 1u);
  EXPECT_EQ(j["allowances"][0], "peukert-derating");
  EXPECT_EQ(Cli({"life", "--capacity", "2000mAh", "--average", "1mA", "--peukert", "1.2"}).code, cli::kExitBadInput);
}

using testing::Cell2500;

// Constant-current runs at three rates: the compare command fits Peukert's
// law over them and writes the HTML comparison; `report --html` writes a
// well-formed page.
TEST(CompareCli, PeukertOverThreeRatesAndHtml) {
  testing::TempDir dir;
  std::string db = dir.File("runs.db");
  {
    SteadyClock wall;
    auto store = Store::Open(db, wall);
    ASSERT_TRUE(store.ok());
    for (double c_rate : {0.2, 0.5, 1.0}) {
      VirtualClock clock;
      SimRig rig(clock, sim::DemoLiIonCell(2.56));
      RunController rc(**store, clock, rig.roles());
      Plan p = RatedCapacityPlan(Cell2500(), 2.0);
      p.steps[0].current_a = Cell2500().CRateToAmps(c_rate);
      p.limits.max_current_a = p.steps[0].current_a * 1.5;
      auto r = rc.Execute(p, {});
      ASSERT_TRUE(r.ok());
      ASSERT_EQ(r->outcome, Outcome::kCompleted) << r->reason;
    }
  }
  // A record with a hole the runner logged: the report flags it.
  {
    SteadyClock wall;
    auto store = Store::Open(db, wall);
    ASSERT_TRUE(store.ok());
    auto run = (*store)->BeginRun({"gap-cell", "li-ion", 2500, "manual", "", "test"});
    ASSERT_TRUE(run.ok());
    for (int k = 0; k < 100; ++k) ASSERT_OK((*store)->AppendSample(*run, {k * 1.0, 3.8, 0.5, 22.0, 0}));
    ASSERT_OK((*store)->AddEvent(*run, 101.0, "gap", "resumed after an interruption"));
    for (int k = 101; k < 200; ++k) ASSERT_OK((*store)->AppendSample(*run, {k * 1.0, 3.8, 0.5, 22.0, 0}));
    ASSERT_OK((*store)->FinishRun(*run, Outcome::kCompleted, "test"));
  }
  CliResult gap = Cli({"report", "4", "--db", db, "--json"});
  ASSERT_EQ(gap.code, 0) << gap.err;
  auto gj = nlohmann::json::parse(gap.out);
  ASSERT_EQ(gj["gaps"].size(), 1u);
  EXPECT_EQ(gj["gaps"][0]["start_s"].get<double>(), 99.0);
  EXPECT_EQ(gj["gaps"][0]["end_s"].get<double>(), 101.0);

  std::string html = dir.File("cmp.html");
  std::string csv = dir.File("cmp.csv");
  CliResult r = Cli({"compare", "1", "2", "3", "--db", db, "--json", "--html", html, "--csv", csv, "--at", "750mA"});
  ASSERT_EQ(r.code, 0) << r.err;
  auto j = nlohmann::json::parse(r.out);
  ASSERT_TRUE(j["peukert"].contains("exponent_k")) << j.dump();
  double k = j["peukert"]["exponent_k"].get<double>();
  RecordProperty("peukert_k", std::to_string(k));
  RecordProperty("peukert_r2", std::to_string(j["peukert"]["r_squared"].get<double>()));
  RecordProperty("capacity_at_750mA_mAh", std::to_string(j["peukert"]["prediction"]["capacity_mAh"].get<double>()));
  EXPECT_GT(k, 0.95);  // about 1 or above: a cell delivers no more at higher current
  EXPECT_LT(k, 1.5);
  EXPECT_GT(j["peukert"]["r_squared"].get<double>(), 0.9);
  // The runs drew 0.5 A, 1.25 A and 2.5 A: the prediction at 0.75 A lies
  // between the first two runs' capacities.
  double at = j["peukert"]["prediction"]["capacity_mAh"].get<double>();
  EXPECT_LE(at, j["runs"][0]["charge_mAh"].get<double>() + 1.0);
  EXPECT_GE(at, j["runs"][1]["charge_mAh"].get<double>() - 1.0);
  EXPECT_EQ(testing::CheckXml(ReadFile(html)), "");
  std::string table = ReadFile(csv);
  EXPECT_EQ(std::count(table.begin(), table.end(), '\n'), 4);
  EXPECT_EQ(table.rfind("run,charge_mAh,", 0), 0u);

  std::string page = dir.File("run1.html");
  CliResult rep = Cli({"report", "1", "--db", db, "--html", page});
  ASSERT_EQ(rep.code, 0) << rep.err;
  std::string text = ReadFile(page);
  EXPECT_EQ(testing::CheckXml(text), "");
  EXPECT_NE(text.find("plot-voltage-charge"), std::string::npos);
  // Options do not leak from one invocation to the next.
  CliResult plain = Cli({"report", "1", "--db", db});
  EXPECT_EQ(plain.out.find("HTML report written"), std::string::npos);
}

}  // namespace
}  // namespace kp
