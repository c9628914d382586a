// Multi-channel benches: rig files with [[channel]] tables, the simulated
// multi-channel instruments in both channel-select styles, many runs in one
// process (each with its own record and end), bench-level faults and
// per-channel locks. Everything in virtual time on a LockstepClock.
#include <gtest/gtest.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <array>
#include <atomic>
#include <cmath>
#include <fstream>
#include <set>

#include "drivers/inproc_transport.h"
#include "drivers/lockstep_clock.h"
#include "drivers/sim/multi_bench.h"
#include "procedures/procedure_parser.h"
#include "rig/bench_run.h"
#include "rig/channel_bench.h"
#include "rig/control_channel.h"
#include "rig/rig_file.h"
#include "rig/run_lock.h"
#include "tests/support/sim_channels.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

using testing::TempDir;

constexpr double kCellAh = 2.56;

// A four-channel bench: one multi-channel load, scanner and thermometer.
std::string BenchText(const std::string& dialect, bool enclosure = true) {
  testing::SimChannelRig r;
  r.dialect = dialect;
  r.max_voltage_v = 4.3;
  r.confirm_load_writes = true;
  r.enclosure = enclosure;
  return testing::SimChannelRigText(r);
}

const char* kProcedure = R"(name "bench test: 1 It to cutoff"
cell li-ion rated=2560mAh nominal=3.65V max=4.2V cutoff=3.0V max-temp=60degC
safety max-temp=55degC max-time=6h
rest 1min every=10s
dcir 0.2C/10s 1C/1s every=1s
discharge 1C until voltage<=3.0V every=10s
)";

Plan TestPlan() {
  auto plan = CompileProcedure(kProcedure, "bench-test.kpp");
  EXPECT_TRUE(plan.ok()) << plan.status().ToString();
  return *plan;
}

// The simulated bench behind a parsed rig file, in process.
struct SimBenchFixture {
  explicit SimBenchFixture(const std::string& dialect, int channels = 4, uint64_t seed = 11, bool enclosure = true)
      : multi(sim::BatchCells(sim::DemoLiIonCell(kCellAh), sim::CellSpread{0.03, 0.10, 0.0}, channels, seed), clock) {
    path = dir.File("bench.toml");
    std::ofstream(path) << BenchText(dialect, enclosure);
    auto s = LoadRigFile(path);
    EXPECT_TRUE(s.ok()) << s.status().ToString();
    spec = *s;
  }
  BenchOpenOptions Options() {
    BenchOpenOptions o;
    o.rig.clock = &clock;
    o.connect = [this, sim = ConnectToSimBench(multi, clock)](const InstrumentSpec& is) -> Result<std::unique_ptr<Transport>> {
      if (wrap_load && is.name == "mload") return std::unique_ptr<Transport>(std::make_unique<InProcTransport>(*wrap_load, clock, "inproc:mload"));
      return sim(is);
    };
    return o;
  }
  std::vector<ChannelJob> Jobs(const Plan& plan, int n) { return testing::BatchJobs(plan, n, "SN", "T1"); }
  BenchRunOptions RunOptions() {
    BenchRunOptions o;
    o.db_path = dir.File("runs.db");
    o.lock_dir = dir.File("locks");
    return o;
  }

  TempDir dir;
  LockstepClock clock;
  sim::SimMultiBench multi;
  LineDevice* wrap_load = nullptr;
  std::string path;
  RigFileSpec spec;
};

// ---------------------------------------------------------------- rig files

TEST(ChannelRigFile, ReadsChannelsTheirBindingsAndTheEnclosure) {
  SimBenchFixture f("kneepoint-sim-select");
  ASSERT_EQ(f.spec.channels.size(), 4u);
  const ChannelSpec& c = f.spec.channels[2];
  EXPECT_EQ(c.slot, "A3");
  EXPECT_EQ(f.spec.instruments[static_cast<size_t>(c.load.instrument)].name, "mload");
  EXPECT_EQ(c.load.channel, "3");
  EXPECT_EQ(c.sense.channel, "3");
  EXPECT_FALSE(c.supply.bound());
  EXPECT_EQ(f.spec.enclosure.sensor.channel, "0");
  EXPECT_DOUBLE_EQ(f.spec.enclosure.max_c, 45.0);
}

// Each bad declaration: what is replaced, and the message with file:line:col.
TEST(ChannelRigFile, BadChannelDeclarationsNameFileLineAndColumn) {
  struct Case {
    std::string from, to, expect;
  };
  const std::vector<Case> cases = {
      {"load = \"mload#2\"", "load = \"mlaod#2\"", "bench.toml:37:8: key 'channel[2].load': no [[instrument]] is named 'mlaod': did you mean 'mload'?"},
      {"load = \"mload#2\"", "load = \"mload\"", "bench.toml:37:8: key 'channel[2].load': instrument 'mload' has several channels"},
      {"load = \"mload#2\"", "load = \"mload#99\"", "bench.toml:37:8: key 'channel[2].load': channel 99 is beyond instrument 'mload', which has 64"},
      {"load = \"mload#2\"", "load = \"mload#1\"", "bench.toml:37:8: key 'channel[2].load': 'mload#1' already serves slot 'A1' as its load"},
      {"load = \"mload#2\"", "load = \"scanner#2\"", "bench.toml:37:8: key 'channel[2].load': instrument 'scanner' (line 15) does not have the role 'load'"},
      {"slot = \"A2\"", "slot = \"A1\"", "bench.toml:36:8: key 'channel[2].slot': slot 'A1' is already declared on line 30"},
      {"load = \"mload#2\"\n", "", "bench.toml:35:1: key 'channel[2].load': missing"},
      {"slot = \"A2\"", "slot = \"A2\"\ncolour = \"red\"", "bench.toml:37:10: key 'channel[2].colour': unknown key"},
      {"max_c = 45.0", "max_c = \"hot\"", "key 'enclosure.max_c': must be a temperature in degC"},
  };
  TempDir dir;
  std::string good = BenchText("kneepoint-sim-select");
  for (const Case& c : cases) {
    std::string text = good;
    size_t at = text.find(c.from);
    ASSERT_NE(at, std::string::npos) << c.from;
    text.replace(at, c.from.size(), c.to);
    std::string path = dir.File("bench.toml");
    auto spec = ParseRigFile(text, path);
    ASSERT_FALSE(spec.ok()) << c.to;
    EXPECT_NE(spec.status().message().find(c.expect), std::string::npos) << spec.status().message() << "\nexpected: " << c.expect;
  }
}

TEST(ChannelRigFile, OneChannelDialectTakesNoChannelNumber) {
  TempDir dir;
  std::string text = BenchText("kneepoint-sim-select");
  // The thermometer becomes the one-channel simulator: "tlog#3" must be refused there.
  size_t at = text.find("profile = \"kneepoint-sim-select\"\nroles = [\"thermometer\"]");
  ASSERT_NE(at, std::string::npos);
  text.replace(at, std::string("profile = \"kneepoint-sim-select\"").size(), "profile = \"kneepoint-sim\"");
  auto spec = ParseRigFile(text, dir.File("bench.toml"));
  ASSERT_FALSE(spec.ok());
  EXPECT_NE(spec.status().message().find("cannot address channels"), std::string::npos) << spec.status().message();
  EXPECT_NE(spec.status().message().find("bench.toml:33:15:"), std::string::npos) << spec.status().message();
}

TEST(ChannelDialect, SelectLineMustCarryTheChannel) {
  auto p = ParseProfile("roles = [\"meter\"]\nchannel-select = \"INST:NSEL 1\"\n[commands]\nmeter-read-voltage = \"MEAS:VOLT?\"\n", "x.kpd");
  ASSERT_FALSE(p.ok());
  EXPECT_NE(p.status().message().find("x.kpd:2: key 'channel-select': 'INST:NSEL 1' needs {ch}"), std::string::npos)
      << p.status().message();
  auto good = ParseProfile("roles = [\"meter\"]\nchannels = 8\nchannel-select = \"INST:NSEL {ch}\"\n[commands]\nmeter-read-voltage = \"MEAS:VOLT?\"\n",
                           "y.kpd");
  ASSERT_TRUE(good.ok()) << good.status().ToString();
  EXPECT_EQ(good->channels, 8);
  EXPECT_TRUE(good->SelectsChannels());
  ApplyChannel(*good, "5");
  EXPECT_EQ(good->channel_select, "INST:NSEL 5");
}

TEST(ChannelDialect, ReadBackKeepsTheChannelList) {
  EXPECT_EQ(ReadBackQuery("CURR {},(@3)"), "CURR? (@3)");
  EXPECT_EQ(ReadBackQuery("INP OFF,(@12)"), "INP? (@12)");
  EXPECT_EQ(ReadBackQuery("INP OFF"), "INP?");
}

// ---------------------------------------------------------------- the simulator

TEST(SimMultiBench, RoutesBothSelectStylesToTheRightCell) {
  LockstepClock clock;
  sim::SimMultiBench m(sim::BatchCells(sim::DemoLiIonCell(kCellAh), {0.03, 0.1, 0.0}, 3, 5), clock);
  m.load().HandleLine("INST:NSEL 2");
  m.load().HandleLine("CURR 1.5");
  m.load().HandleLine("INP ON");
  m.load().HandleLine("CURR 0.5,(@3)");
  m.load().HandleLine("INP ON,(@3)");
  EXPECT_FALSE(m.channel(1).load_input_on());
  EXPECT_TRUE(m.channel(2).load_input_on());
  EXPECT_TRUE(m.channel(3).load_input_on());
  EXPECT_EQ(m.load().HandleLine("INST:NSEL?").value_or(""), "2");
  EXPECT_EQ(m.load().HandleLine("INP? (@1)").value_or(""), "0");
  clock.SleepUntil(Seconds(60));
  EXPECT_NEAR(m.channel(2).load_current_a(), 1.5, 1e-9);
  EXPECT_NEAR(m.channel(3).load_current_a(), 0.5, 1e-9);
  // A channel out of range is an instrument error, not a silent fallback.
  m.load().HandleLine("INP OFF,(@9)");
  EXPECT_NE(m.load().HandleLine("SYST:ERR?").value_or("").find("-222"), std::string::npos);
  EXPECT_TRUE(m.channel(3).load_input_on());
  // Different cells behind the channels (the batch spread).
  EXPECT_NE(m.channel(1).cell().params().capacity_ah, m.channel(2).cell().params().capacity_ah);
}

// ---------------------------------------------------------------- many runs

class BothStyles : public ::testing::TestWithParam<const char*> {};

TEST_P(BothStyles, FourCellsRunAtOnceEachWithItsOwnRecordAndPeriod) {
  SimBenchFixture f(GetParam());
  auto bench = OpenChannelBench(f.spec, f.Options());
  ASSERT_TRUE(bench.ok()) << bench.status().ToString();
  Plan plan = TestPlan();
  auto out = RunBench(**bench, f.Jobs(plan, 4), f.RunOptions());
  ASSERT_TRUE(out.ok()) << out.status().ToString();
  SteadyClock wall;
  auto store = Store::Open(f.dir.File("runs.db"), wall);
  ASSERT_TRUE(store.ok());
  std::set<std::string> uuids;
  std::set<double> capacities;
  for (size_t k = 0; k < out->size(); ++k) {
    const ChannelOutcome& o = (*out)[k];
    ASSERT_TRUE(o.status.ok()) << o.status.ToString();
    EXPECT_EQ(o.result.outcome, Outcome::kCompleted) << o.slot << ": " << o.result.reason;
    EXPECT_EQ(o.left_on, "");
    auto run = (*store)->GetRun(o.result.run_id);
    ASSERT_TRUE(run.ok());
    uuids.insert(run->uuid);
    EXPECT_EQ(run->cell_serial, "SN-" + std::to_string(k + 1));
    ASSERT_TRUE(run->delivered_mah.has_value());
    capacities.insert(std::round(*run->delivered_mah));
    // Its own sample period: the discharge's readings every 10 s exactly,
    // whatever the other three channels did meanwhile.
    auto samples = (*store)->LoadSamples(o.result.run_id);
    ASSERT_TRUE(samples.ok());
    // (The discharge is step index 2; its last reading, the one at the
    // cutoff, comes when the cutoff is reached, not on the period.)
    int spaced = 0;
    for (size_t i = 1; i + 1 < samples->size(); ++i) {
      const Sample& a = (*samples)[i - 1];
      const Sample& b = (*samples)[i];
      if (a.step != 2 || b.step != 2 || (*samples)[i + 1].step != 2) continue;
      EXPECT_NEAR(b.t_s - a.t_s, 10.0, 1e-6) << o.slot << " at " << b.t_s;
      ++spaced;
    }
    EXPECT_GT(spaced, 200) << o.slot;
    // The cell behind this channel, and only it, was discharged.
    EXPECT_LT(f.multi.channel(static_cast<int>(k) + 1).cell_soc(), 0.2) << o.slot;
    EXPECT_FALSE(f.multi.channel(static_cast<int>(k) + 1).load_input_on()) << o.slot;
  }
  EXPECT_EQ(uuids.size(), 4u);
  EXPECT_EQ(capacities.size(), 4u) << "four different cells give four different capacities";
  const bool select_style = std::string(GetParam()) == "kneepoint-sim-select";
  EXPECT_EQ(f.multi.select_lines() > 0, select_style);
}

INSTANTIATE_TEST_SUITE_P(Dialects, BothStyles, ::testing::Values("kneepoint-sim-select", "kneepoint-sim-chlist"));

TEST(ChannelBench, AbortOnOneChannelLeavesTheOthersRunning) {
  SimBenchFixture f("kneepoint-sim-chlist");
  auto bench = OpenChannelBench(f.spec, f.Options());
  ASSERT_TRUE(bench.ok()) << bench.status().ToString();
  Plan plan = TestPlan();
  BenchRunOptions o = f.RunOptions();
  o.wall = &f.clock;  // control requests are polled in run time
  SteadyClock wall;
  auto requester = Store::Open(o.db_path, wall);
  ASSERT_TRUE(requester.ok());
  std::atomic<bool> asked{false}, checked{false};
  std::array<bool, 4> on_after{};
  o.on_sample = [&](int job, const Reading& r, double) {
    if (job == 1 && r.t_s >= 600 && !asked.exchange(true)) {
      RunFilter filter;
      filter.tag = "slot=A2";
      auto runs = (*requester)->FindRuns(filter);
      ASSERT_TRUE(runs.ok() && runs->size() == 1);
      ASSERT_OK(ControlChannel::Request(**requester, runs->front().id, ControlAction::kAbort, "tester"));
    }
    // Well after the abort, with every other channel still discharging: the loads as the simulator sees them.
    if (job == 0 && r.t_s >= 1200 && !checked.exchange(true))
      for (int k = 0; k < 4; ++k) on_after[static_cast<size_t>(k)] = f.multi.channel(k + 1).load_input_on();
  };
  auto out = RunBench(**bench, f.Jobs(plan, 4), o);
  ASSERT_TRUE(out.ok()) << out.status().ToString();
  ASSERT_TRUE(checked.load());
  EXPECT_TRUE(on_after[0]);
  EXPECT_FALSE(on_after[1]) << "the aborted channel's load is off";
  EXPECT_TRUE(on_after[2]);
  EXPECT_TRUE(on_after[3]);
  EXPECT_EQ((*out)[1].result.outcome, Outcome::kAborted);
  EXPECT_NE((*out)[1].result.reason.find("tester"), std::string::npos) << (*out)[1].result.reason;
  for (size_t k : {0u, 2u, 3u}) EXPECT_EQ((*out)[k].result.outcome, Outcome::kCompleted) << (*out)[k].result.reason;
  for (int k = 1; k <= 4; ++k) EXPECT_FALSE(f.multi.channel(k).load_input_on());
}

TEST(ChannelBench, EnclosureOverTemperatureSwitchesEveryChannelOff) {
  SimBenchFixture f("kneepoint-sim-select");
  auto bench = OpenChannelBench(f.spec, f.Options());
  ASSERT_TRUE(bench.ok()) << bench.status().ToString();
  Plan plan = TestPlan();
  BenchRunOptions o = f.RunOptions();
  std::atomic<double> raised_at{-1.0};
  o.on_sample = [&](int job, const Reading& r, double) {
    if (job == 2 && r.t_s >= 900 && raised_at.load() < 0) {
      raised_at = r.t_s;
      f.multi.SetEnclosure(52.0);
    }
  };
  auto out = RunBench(**bench, f.Jobs(plan, 4), o);
  ASSERT_TRUE(out.ok()) << out.status().ToString();
  SteadyClock wall;
  auto store = Store::Open(o.db_path, wall);
  ASSERT_TRUE(store.ok());
  for (const ChannelOutcome& c : *out) {
    EXPECT_EQ(c.result.outcome, Outcome::kAborted) << c.slot;
    EXPECT_NE(c.result.reason.find("enclosure at 52.0 °C"), std::string::npos) << c.result.reason;
    EXPECT_NE(c.fault, "");
    // Ended within one enclosure period (10 s) and one sample period (10 s) of the rise.
    auto progress = (*store)->LoadProgress(c.result.run_id);
    ASSERT_TRUE(progress.ok() && progress->has_value());
    EXPECT_LE((*progress)->t_s, raised_at.load() + 20.0 + 1e-6) << c.slot;
  }
  for (int k = 1; k <= 4; ++k) EXPECT_FALSE(f.multi.channel(k).load_input_on());
}

// Two loads of two channels each: losing one stops its two channels, the
// other load's channels complete.
TEST(ChannelBench, LostSharedLoadStopsOnlyTheChannelsItServes) {
  TempDir dir;
  LockstepClock clock;
  auto cells = sim::BatchCells(sim::DemoLiIonCell(kCellAh), {0.03, 0.1, 0.0}, 2, 3);
  sim::SimMultiBench a(cells, clock), b(cells, clock);
  testing::FaultyDevice broken(a.load());
  std::string text = R"([bench]
name = "two loads"
max_current_a = 5.0

[[instrument]]
name = "loadA"
address = "tcp:127.0.0.1:6001"
profile = "kneepoint-sim-chlist"
roles = ["load"]
[[instrument]]
name = "loadB"
address = "tcp:127.0.0.1:6002"
profile = "kneepoint-sim-chlist"
roles = ["load"]
[[instrument]]
name = "tA"
address = "tcp:127.0.0.1:6003"
profile = "kneepoint-sim-chlist"
roles = ["thermometer"]
[[instrument]]
name = "tB"
address = "tcp:127.0.0.1:6004"
profile = "kneepoint-sim-chlist"
roles = ["thermometer"]

[[channel]]
slot = "A1"
load = "loadA#1"
temperature = "tA#1"
[[channel]]
slot = "A2"
load = "loadA#2"
temperature = "tA#2"
[[channel]]
slot = "B1"
load = "loadB#1"
temperature = "tB#1"
[[channel]]
slot = "B2"
load = "loadB#2"
temperature = "tB#2"
)";
  auto spec = ParseRigFile(text, dir.File("two.toml"));
  ASSERT_TRUE(spec.ok()) << spec.status().ToString();
  BenchOpenOptions bo;
  bo.rig.clock = &clock;
  bo.connect = [&](const InstrumentSpec& is) -> Result<std::unique_ptr<Transport>> {
    LineDevice* d = is.name == "loadA" ? static_cast<LineDevice*>(&broken) : is.name == "loadB" ? &b.load()
                    : is.name == "tA"  ? &a.thermometer() : &b.thermometer();
    return std::unique_ptr<Transport>(std::make_unique<InProcTransport>(*d, clock, "inproc:" + is.name));
  };
  auto bench = OpenChannelBench(*spec, bo);
  ASSERT_TRUE(bench.ok()) << bench.status().ToString();
  broken.forward_when = [](std::string_view line) { return line.find("INP OFF") != std::string_view::npos; };
  Plan plan = TestPlan();
  // A2 reads every 5 minutes: it is asleep when A1 finds the load gone, and
  // only the bench can end it before its next reading.
  std::string slow_text = kProcedure;
  slow_text.replace(slow_text.find("every=10s\n", slow_text.find("discharge")), 10, "every=5min\n");
  auto slow = CompileProcedure(slow_text, "slow.kpp");
  ASSERT_TRUE(slow.ok()) << slow.status().ToString();
  std::vector<ChannelJob> jobs;
  for (int k = 0; k < 4; ++k) {
    ChannelJob j;
    j.channel = k;
    j.plan = k == 1 ? &*slow : &plan;
    j.options.cell_name = "c" + std::to_string(k);
    j.options.link_grace_s = 0.0;
    jobs.push_back(std::move(j));
  }
  BenchRunOptions o;
  o.db_path = dir.File("runs.db");
  o.lock_dir = dir.File("locks");
  // The load goes silent at A1's first reading after 1000 s, while A2 sleeps
  // until its next reading (A2 reads at 71 s + 5 min steps: 971 s, 1271 s).
  // Only A1 talks to load A at that moment, so setting it here races nothing.
  bool silenced = false;
  o.on_sample = [&](int job, const Reading& r, double) {
    if (job == 0 && r.t_s >= 1000 && !silenced) {
      silenced = true;
      broken.silent_after = broken.lines_seen;
    }
  };
  auto out = RunBench(**bench, std::move(jobs), o);
  ASSERT_TRUE(silenced);
  ASSERT_TRUE(out.ok()) << out.status().ToString();
  EXPECT_EQ((*out)[0].result.outcome, Outcome::kAborted);
  // A1 ends on its own failed exchange with the silent load (a reading or a read-back).
  EXPECT_NE((*out)[0].result.reason.find("no reply from inproc:loadA"), std::string::npos) << (*out)[0].result.reason;
  EXPECT_EQ((*out)[0].fault, "");
  EXPECT_EQ((*out)[1].result.outcome, Outcome::kAborted);
  EXPECT_NE((*out)[1].result.reason.find("bench fault: instrument inproc:loadA serving several channels was lost (slot A1"),
            std::string::npos)
      << (*out)[1].result.reason;
  EXPECT_NE((*out)[1].fault, "");
  EXPECT_EQ((*out)[2].result.outcome, Outcome::kCompleted) << (*out)[2].result.reason;
  EXPECT_EQ((*out)[3].result.outcome, Outcome::kCompleted) << (*out)[3].result.reason;
  for (int k = 1; k <= 2; ++k) {
    EXPECT_FALSE(a.channel(k).load_input_on());
    EXPECT_FALSE(b.channel(k).load_input_on());
  }
}

// Another process holds channel A2: a start that needs it is refused before
// anything is switched on; the free channels can be run meanwhile.
TEST(ChannelBench, PerChannelLocksAgainstASecondProcess) {
  SimBenchFixture f("kneepoint-sim-chlist");
  auto bench = OpenChannelBench(f.spec, f.Options());
  ASSERT_TRUE(bench.ok()) << bench.status().ToString();
  std::vector<std::string> a2 = (*bench)->channel(1).lock_keys;
  const std::string lock_dir = f.dir.File("locks");
  int ready[2];
  ASSERT_EQ(::pipe(ready), 0);
  pid_t child = ::fork();
  ASSERT_GE(child, 0);
  if (child == 0) {
    auto held = AcquireAll(a2, "the other process", lock_dir);
    char c = held.ok() ? 'y' : 'n';
    (void)!::write(ready[1], &c, 1);
    ::pause();
    ::_exit(0);
  }
  char c = 0;
  ASSERT_EQ(::read(ready[0], &c, 1), 1);
  ASSERT_EQ(c, 'y');
  Plan plan = TestPlan();
  BenchRunOptions o = f.RunOptions();
  auto refused = RunBench(**bench, f.Jobs(plan, 4), o);
  EXPECT_FALSE(refused.ok());
  EXPECT_EQ(refused.status().code(), StatusCode::kUnavailable) << refused.status().ToString();
  EXPECT_NE(refused.status().message().find("the other process"), std::string::npos) << refused.status().message();
  for (int k = 1; k <= 4; ++k) EXPECT_FALSE(f.multi.channel(k).load_input_on());
  // A1, A3, A4 are free.
  std::vector<ChannelJob> free = f.Jobs(plan, 4);
  free.erase(free.begin() + 1);
  auto out = RunBench(**bench, std::move(free), o);
  ASSERT_TRUE(out.ok()) << out.status().ToString();
  for (const ChannelOutcome& x : *out) EXPECT_EQ(x.result.outcome, Outcome::kCompleted) << x.slot << ": " << x.result.reason;
  EXPECT_GT(f.multi.channel(2).cell_soc(), 0.95) << "the held channel's cell was not touched";
  ::kill(child, SIGKILL);
  ::waitpid(child, nullptr, 0);
  ::close(ready[0]);
  ::close(ready[1]);
}

}  // namespace
}  // namespace kp
