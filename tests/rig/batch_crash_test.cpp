// kill -9 in the middle of a batch: `kneepoint run --slots A1,A2,A3` against
// `kneepoint sim`'s multi-channel instruments over TCP (served from this
// process, channels selected by INST:NSEL) dies by SIGKILL after its 1200th
// reading (a third of the way: at least one commit of each run is in). The guardian must switch every channel's load off (with the select
// line before each of its lines), every run must end `interrupted`, and
// `resume` must finish each one on its own channel (found from the run's slot
// tag), after which the batch report compares the three cells.
#include <gtest/gtest.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <fcntl.h>

#include <chrono>
#include <fstream>
#include <thread>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "drivers/address.h"
#include "drivers/sim/multi_bench.h"
#include "drivers/sim/sim_server.h"
#include "rig/store.h"
#include "tests/support/sim_channels.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"
#include "ui/report/batch_report.h"

namespace kp {
namespace {

using namespace std::chrono_literals;

constexpr double kSpeed = 300.0;  // simulated seconds per wall second
constexpr int kChannels = 3;

struct ServedBatch {
  ServedBatch() {
    auto s = sim::SimServer::Start(*ParseAddress("tcp:127.0.0.1:0"),
                                   {{"load", &multi.load()}, {"meter", &multi.meter()}, {"thermometer", &multi.thermometer()}});
    EXPECT_TRUE(s.ok()) << s.status().ToString();
    server = std::move(*s);
    const auto& a = server->client_addresses();
    testing::SimChannelRig r;
    r.bench_name = "batch bench";
    r.channels = kChannels;
    r.clock_speed = kSpeed;
    r.addresses = a;
    r.timeout_s = 0.5;
    const std::string text = testing::SimChannelRigText(r);
    std::ofstream(rig) << text;
    std::ofstream(proc) << "name \"batch: 1.5 A to 3.0 V\"\n"
                           "cell li-ion rated=500mAh nominal=3.6V max=4.2V cutoff=3.0V max-temp=60degC\n"
                           "safety max-temp=55degC\n"
                           "discharge 1.5A until voltage<=3.0V every=1s\n";
    setenv("KNEEPOINT_LOCK_DIR", dir.File("locks").c_str(), 1);
  }
  ~ServedBatch() { unsetenv("KNEEPOINT_LOCK_DIR"); }  // its folder goes with the fixture
  ServedBatch(const ServedBatch&) = delete;
  ServedBatch& operator=(const ServedBatch&) = delete;
  pid_t Start(const std::vector<std::string>& args, const char* crash) {
    std::vector<std::string> env;
    if (crash != nullptr) env.push_back(std::string("KNEEPOINT_INJECT_CRASH=") + crash);
    testing::SpawnIo io;
    io.stdout_fd = testing::SpawnIo::kDevNull;
    return testing::SpawnKneepoint(args, env, io);
  }
  std::unique_ptr<Store> OpenDb() {
    Store::Options o;
    o.create = false;
    auto s = Store::Open(db, wall, o);
    return s.ok() ? std::move(*s) : nullptr;
  }
  bool AllLoadsOff() const {
    for (int k = 1; k <= kChannels; ++k)
      if (multi.channel(k).load_input_on()) return false;
    return true;
  }

  testing::TempDir dir;
  std::string rig = dir.File("bench.toml"), proc = dir.File("batch.kpp"), db = dir.File("batch.db");
  SteadyClock wall;
  SteadyClock clock{kSpeed};
  // A different cell on each channel: 0.5 Ah cells of one batch (spread 3 % capacity, 10 % resistance).
  mutable sim::SimMultiBench multi{sim::BatchCells(sim::DemoLiIonCell(0.5), {0.03, 0.10, 0.0}, kChannels, 21), clock};
  std::unique_ptr<sim::SimServer> server;
};

TEST(BatchCrash, KillNineMidBatchThenResumeEveryChannel) {
  ServedBatch b;
  pid_t pid = b.Start({"run", b.proc, "--rig", b.rig, "--db", b.db, "--slots", "A1,A2,A3", "--serials", "LX-01,LX-02,LX-03",
                       "--batch", "LX", "--progress", "100000s"},
                      "KILL@1200");
  ASSERT_GT(pid, 0);
  int status = 0;
  ASSERT_EQ(waitpid(pid, &status, 0), pid);
  ASSERT_TRUE(WIFSIGNALED(status) && WTERMSIG(status) == SIGKILL) << "status " << status;
  // The guardian switches every channel off.
  bool off = false;
  for (int i = 0; i < 300 && !off; ++i) {
    off = b.AllLoadsOff();
    if (!off) std::this_thread::sleep_for(10ms);
  }
  ASSERT_TRUE(off) << "a load was still on 3 s after the runner died";
  // Every run of the batch ends interrupted (the guardian's record, or the
  // next open finding its runner gone).
  std::vector<int64_t> ids;
  for (int i = 0; i < 400; ++i) {
    ids.clear();
    auto store = b.OpenDb();
    if (store) {
      (void)store->ReconcileOrphans();  // the runner is gone: its runs are interrupted
      RunFilter f;
      f.tag = "batch=LX";
      auto runs = store->FindRuns(f);
      bool all = runs.ok() && runs->size() == kChannels;
      for (const RunRow& r : runs.ok() ? *runs : std::vector<RunRow>{}) {
        all = all && r.outcome == Outcome::kInterrupted;
        ids.push_back(r.id);
      }
      if (all) break;
    }
    std::this_thread::sleep_for(25ms);
  }
  ASSERT_EQ(ids.size(), static_cast<size_t>(kChannels));
  {
    auto store = b.OpenDb();
    ASSERT_TRUE(store);
    for (int64_t id : ids) {
      auto run = store->GetRun(id);
      ASSERT_TRUE(run.ok());
      EXPECT_EQ(run->outcome, Outcome::kInterrupted) << id << ": " << run->reason;
      EXPECT_GT(run->sample_count, 50) << id;  // committed samples survive the kill
    }
  }
  std::vector<double> soc_before;
  for (int k = 1; k <= kChannels; ++k) soc_before.push_back(b.multi.channel(k).cell_soc());
  // Resume each interrupted run: it goes back to its own channel.
  for (int64_t id : ids) {
    pid_t r = b.Start({"resume", std::to_string(id), "--db", b.db, "--rig", b.rig}, nullptr);
    ASSERT_GT(r, 0);
    int st = 0;
    ASSERT_EQ(waitpid(r, &st, 0), r);
    EXPECT_TRUE(WIFEXITED(st) && WEXITSTATUS(st) == 0) << "resume of run " << id << " status " << st;
  }
  EXPECT_TRUE(b.AllLoadsOff());
  auto store = b.OpenDb();
  ASSERT_TRUE(store);
  for (int64_t id : ids) {
    auto run = store->GetRun(id);
    ASSERT_TRUE(run.ok());
    EXPECT_EQ(run->outcome, Outcome::kCompleted) << id << ": " << run->reason;
    auto ev = store->LoadEvents(id);
    ASSERT_TRUE(ev.ok());
    bool gap = false;
    for (const EventRow& e : *ev) gap = gap || e.kind == "gap";
    EXPECT_TRUE(gap) << "run " << id << " has no gap event";
  }
  // Each channel's own cell was the one emptied by its resume.
  for (int k = 1; k <= kChannels; ++k) EXPECT_LT(b.multi.channel(k).cell_soc(), soc_before[static_cast<size_t>(k - 1)] - 0.3) << k;
  auto rep = BuildBatchReport(*store, "LX");
  ASSERT_TRUE(rep.ok()) << rep.status().ToString();
  ASSERT_EQ(rep->cells.size(), static_cast<size_t>(kChannels));
  EXPECT_EQ(rep->capacity.n, kChannels);
  for (const BatchCell& c : rep->cells) {
    EXPECT_TRUE(c.in_statistics) << c.slot;
    ASSERT_TRUE(c.capacity_mah.has_value());
    // Most of a 500 mAh cell at 3 It to 3.0 V, kill and outage included (real-time scheduling moves it by some %).
    EXPECT_GT(*c.capacity_mah, 200.0) << c.slot;
    EXPECT_LT(*c.capacity_mah, 525.0) << c.slot;
  }
  EXPECT_EQ(rep->cells[0].slot, "A1");
  EXPECT_EQ(rep->cells[2].run.cell_serial, "LX-03");
  nlohmann::json j = BatchReportJson(*rep);
  EXPECT_EQ(j["schema_version"], kBatchReportSchemaVersion);
  EXPECT_EQ(j["cells"].size(), static_cast<size_t>(kChannels));
}

}  // namespace
}  // namespace kp
