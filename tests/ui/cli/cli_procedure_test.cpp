// `kneepoint check` and `kneepoint run` through the real command line.
#include <gtest/gtest.h>

#include <fstream>
#include <string>
#include <vector>

#include "rig/store.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"
#include "ui/cli/cli.h"
#include "ui/report/run_report.h"

namespace kp {
namespace {

int Cli(std::vector<std::string> args) { return testing::RunKneepoint(std::move(args)); }

std::string Write(const testing::TempDir& dir, const std::string& name, const std::string& text) {
  std::string path = dir.File(name);
  std::ofstream(path) << text;
  return path;
}

const char* kGood =
    "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n"
    "discharge 1A until time>=10min\nrest 5min\n";

TEST(CliProcedure, CheckExitCodes) {
  testing::TempDir dir;
  EXPECT_EQ(Cli({"check", Write(dir, "good.kpp", kGood)}), cli::kExitOk);
  EXPECT_EQ(Cli({"check", Write(dir, "bad.kpp", "cell li-ion rated=2500 cutoff=3V\n")}), cli::kExitBadInput);
  EXPECT_EQ(Cli({"check", dir.File("missing.kpp")}), cli::kExitBadInput);
  // A segment the rig cannot sample is an error, not skipped.
  std::string fast = Write(dir, "fast.kpp", std::string(kGood) + "pulse 1A/80ms 0A/1s until time>=1min\n");
  EXPECT_EQ(Cli({"check", fast}), cli::kExitBadInput);
  EXPECT_EQ(Cli({"check", fast, "--min-sample", "20ms"}), cli::kExitOk);
}

TEST(CliProcedure, RunOnTheSimulatorRecordsTheRun) {
  testing::TempDir dir;
  std::string db = dir.File("runs.db");
  EXPECT_EQ(Cli({"run", Write(dir, "p.kpp", kGood), "--rig", "sim", "--db", db}), cli::kExitOk);
  SteadyClock wall;
  auto store = Store::Open(db, wall);
  ASSERT_TRUE(store.ok());
  auto runs = (*store)->ListRuns();
  ASSERT_TRUE(runs.ok());
  ASSERT_EQ(runs->size(), 1u);
  EXPECT_EQ((*runs)[0].outcome, Outcome::kCompleted);
  EXPECT_EQ((*runs)[0].cell, "sim-li-ion-2500mAh");  // derived from the procedure, not random
  EXPECT_EQ((*runs)[0].procedure_text, kGood);
  // A procedure with errors never starts a run.
  EXPECT_EQ(Cli({"run", Write(dir, "bad.kpp", "rest 5s\n"), "--rig", "sim", "--db", db}), cli::kExitBadInput);
  EXPECT_EQ((*store)->ListRuns()->size(), 1u);
}

// The coin-cell procedure of the library simulates its own chemistry: the
// Li-MnO2 preset at the procedure's 230 mAh, run to its 2.0 V end under the
// compressed duty cycle, with the load off at the end and the run judged as
// what it is (a pulsed discharge, not a rated-capacity test).
TEST(CliProcedure, CoinCellLibraryProcedureRunsOnItsOwnChemistry) {
  testing::TempDir dir;
  std::string db = dir.File("runs.db");
  std::string file = testing::SourcePath("procedures/library/sensor-node-duty-cycle.kpp").string();
  ASSERT_EQ(Cli({"run", file, "--rig", "sim", "--db", db}), cli::kExitOk);
  SteadyClock wall;
  auto store = Store::Open(db, wall);
  ASSERT_TRUE(store.ok());
  auto runs = (*store)->ListRuns();
  ASSERT_TRUE(runs.ok());
  ASSERT_EQ(runs->size(), 1u);
  const RunRow& run = (*runs)[0];
  EXPECT_EQ(run.outcome, Outcome::kCompleted) << run.reason;
  EXPECT_EQ(run.chemistry, "li-mno2");
  EXPECT_EQ(run.cell, "sim-li-mno2-230mAh");
  auto rep = BuildRunReport(**store, run.id);
  ASSERT_TRUE(rep.ok()) << rep.status().ToString();
  const RunAnalysis& a = rep->analysis;
  EXPECT_TRUE(a.pulsed);
  EXPECT_FALSE(a.verdict.judged);
  EXPECT_EQ(a.verdict.brief, "not judged: pulsed discharge");
  // Bursts to 45 mA from a cell of tens of ohms end the test while most of
  // the charge a light drain would get is still in it, but well past half.
  EXPECT_GT(a.discharge_charge_mah, 0.5 * 230.0);
  EXPECT_LT(a.discharge_charge_mah, 240.0);
}

}  // namespace
}  // namespace kp
