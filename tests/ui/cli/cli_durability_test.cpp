// The durability commands through the real command line: export streams
// CSV/JSON, abort/pause/continue queue requests naming who asked, resume
// refuses what it must.
#include <gtest/gtest.h>

#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"
#include "ui/cli/cli.h"

namespace kp {
namespace {

int Cli(std::vector<std::string> args) { return testing::RunKneepoint(std::move(args)); }

std::string Slurp(const std::string& path) {
  std::ifstream in(path);
  std::stringstream s;
  s << in.rdbuf();
  return s.str();
}

int64_t ShortRun(const std::string& db) {
  SteadyClock wall;
  VirtualClock clock;
  auto store = Store::Open(db, wall);
  EXPECT_TRUE(store.ok());
  SimRig rig(clock, sim::DemoLiIonCell(2.56));
  Plan p = RatedCapacityPlan(testing::Cell2500());
  p.steps[0].end.time_s = 120;
  RunController rc(**store, clock, rig.roles());
  auto r = rc.Execute(p, {});
  EXPECT_TRUE(r.ok());
  return r->run_id;
}

TEST(CliDurability, ExportWritesCsvAndJsonWithEverySample) {
  testing::TempDir dir;
  const std::string db = dir.File("e.db");
  int64_t run = ShortRun(db);
  ASSERT_EQ(Cli({"export", std::to_string(run), "--db", db, "--csv", dir.File("o.csv")}), cli::kExitOk);
  std::vector<Sample> stored;
  {
    SteadyClock wall;
    auto store = Store::Open(db, wall);
    ASSERT_TRUE(store.ok());
    stored = *(*store)->LoadSamples(run);
  }
  // 120 s of discharge: the open-circuit reading, one just after the load
  // switched on, then one per second.
  ASSERT_EQ(stored.size(), 122u);
  std::string csv = Slurp(dir.File("o.csv"));
  EXPECT_EQ(csv.substr(0, csv.find('\n')), "t_s,voltage_V,current_A,temperature_C,step,step_number,cycle,time_utc,step_kind,charge_Ah,energy_Wh\r");
  EXPECT_EQ(std::count(csv.begin(), csv.end(), '\n'), 1 + static_cast<long>(stored.size()));  // header + every sample
  ASSERT_EQ(Cli({"export", std::to_string(run), "--db", db, "--json", dir.File("o.json")}), cli::kExitOk);
  auto j = nlohmann::json::parse(Slurp(dir.File("o.json")));
  ASSERT_EQ(j["samples"].size(), stored.size());
  EXPECT_EQ(j["samples"][0][0].get<double>(), 0.0);
  EXPECT_EQ(j["samples"][stored.size() - 1][0].get<double>(), stored.back().t_s);
  EXPECT_DOUBLE_EQ(j["samples"][5][2].get<double>(), 0.5);
  EXPECT_EQ(j["run"]["id"].get<int64_t>(), run);
  EXPECT_FALSE(j["events"].empty());
  EXPECT_EQ(Cli({"export", std::to_string(run), "--db", db}), cli::kExitBadInput);  // neither format
}

TEST(CliDurability, ControlCommandsQueueRequestsForARunningRun) {
  testing::TempDir dir;
  const std::string db = dir.File("c.db");
  int64_t finished = ShortRun(db);
  EXPECT_EQ(Cli({"abort", std::to_string(finished), "--db", db}), cli::kExitBadInput);  // nothing to abort
  // A live run: this process is its runner.
  SteadyClock wall;
  auto store = Store::Open(db, wall);
  ASSERT_TRUE(store.ok());
  auto live = (*store)->BeginRun({"c2", "li-ion", 2500, "p", "t", "sim"});
  ASSERT_TRUE(live.ok());
  ASSERT_EQ(Cli({"pause", std::to_string(*live), "--db", db, "--as", "night-shift@lab", "--wait", "0"}), cli::kExitOk);
  ASSERT_EQ(Cli({"continue", std::to_string(*live), "--db", db, "--wait", "0"}), cli::kExitOk);
  auto pending = (*store)->PendingRequests(*live);
  ASSERT_TRUE(pending.ok());
  ASSERT_EQ(pending->size(), 2u);
  EXPECT_EQ((*pending)[0].action, "pause");
  EXPECT_EQ((*pending)[0].requested_by, "night-shift@lab");
  EXPECT_EQ((*pending)[1].action, "continue");
  EXPECT_NE((*pending)[1].requested_by.find('@'), std::string::npos);  // user@host by default
}

TEST(CliDurability, ResumeRefusesARunThatIsNotInterrupted) {
  testing::TempDir dir;
  const std::string db = dir.File("r.db");
  int64_t run = ShortRun(db);
  EXPECT_EQ(Cli({"resume", std::to_string(run), "--db", db, "--rig", "sim"}), cli::kExitBadInput);
  EXPECT_EQ(Cli({"resume", "99", "--db", db, "--rig", "sim"}), cli::kExitBadInput);
}

}  // namespace
}  // namespace kp
