// The guardian on the simulator served over TCP and pseudo-terminals: a
// `kneepoint run` child is killed mid-discharge (SIGKILL, an injected
// SIGSEGV, a hang), and the simulated load must read off within 2 s of the
// runner's death (a generous bound for a check made within milliseconds on
// an idle machine), the run must end `interrupted` with the guardian's events,
// and `resume` must continue it. Handled signals (SIGHUP) and a closed stdout
// (SIGPIPE) are checked too. The full seeded campaign is
// tests/campaign/fault_campaign.sh.
#include <gtest/gtest.h>
#include <netinet/in.h>
#include <signal.h>
#include <sys/socket.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include <fmt/format.h>

#include "drivers/address.h"
#include "drivers/clock.h"
#include "drivers/scpi_session.h"
#include "drivers/sim/sim_bench.h"
#include "drivers/sim/sim_server.h"
#include "drivers/stream_transport.h"
#include "rig/guardian.h"
#include "rig/rig_file.h"
#include "rig/store.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

using namespace std::chrono_literals;

// Simulated seconds per wall second for the served bench and the runner's
// clock: a 10-minute discharge takes 30 s. The load's watchdog is armed for
// 60 wall seconds (1200 simulated): whatever switches the load off within the
// 2 s checked here is the guardian.
constexpr double kSpeed = 20.0;

double Since(std::chrono::steady_clock::time_point t0) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
}

struct GuardedBench {
  explicit GuardedBench(const char* listen) {
    auto s = sim::SimServer::Start(*ParseAddress(listen), {{"load", &bench.load()},
                                                            {"meter", &bench.meter()},
                                                            {"thermometer", &bench.thermometer()},
                                                            {"supply", &bench.supply()}});
    EXPECT_TRUE(s.ok()) << s.status().ToString();
    server = std::move(*s);
    const auto& a = server->client_addresses();
    std::string text = fmt::format("[bench]\nname = \"guarded\"\nclock_speed = {}\nmax_current_a = 5.0\n", kSpeed);
    const char* roles[] = {"load", "meter", "thermometer", "supply"};
    for (int i = 0; i < 4; ++i)
      text += fmt::format("\n[[instrument]]\nname = \"sim {}\"\naddress = \"{}\"\nprofile = \"kneepoint-sim\"\nroles = [\"{}\"]\n"
                          "timeout_s = 0.5\n",
                          roles[i], a[i], roles[i]);
    std::ofstream(rig) << text;
    std::ofstream(proc) << "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n"
                           "safety max-temp=55degC\n"
                           "discharge 1A until voltage<=2.75V or time>=10min every=1s\n";
  }

  // `kneepoint ARGS...` in a child process; `crash` sets KNEEPOINT_INJECT_CRASH,
  // `stdout_fd` >= 0 becomes its stdout.
  pid_t Start(const std::vector<std::string>& args, const char* crash = nullptr, int stdout_fd = -1) {
    std::vector<std::string> env;
    if (crash != nullptr) env.push_back(std::string("KNEEPOINT_INJECT_CRASH=") + crash);
    testing::SpawnIo io;
    io.stdout_fd = stdout_fd;
    return testing::SpawnKneepoint(args, env, io);
  }
  pid_t StartRun(const char* crash = nullptr, std::vector<std::string> extra = {}, int stdout_fd = -1, const char* progress_s = "100000s") {
    std::vector<std::string> args = {"run", proc, "--rig", rig, "--db", db, "--cell", "guarded-cell", "--progress", progress_s};
    args.insert(args.end(), extra.begin(), extra.end());
    return Start(args, crash, stdout_fd);
  }

  std::unique_ptr<Store> OpenDb() {
    Store::Options o;
    o.create = false;
    auto s = Store::Open(db, wall, o);
    return s.ok() ? std::move(*s) : nullptr;
  }
  // Waits (bounded) until the newest run has `n` committed samples with the
  // load on; returns its id (0 on timeout).
  int64_t WaitForSamples(int n) {
    for (int i = 0; i < 400; ++i) {
      std::this_thread::sleep_for(25ms);
      auto store = OpenDb();
      if (!store) continue;
      auto runs = store->ListRuns();
      if (!runs.ok() || runs->empty()) continue;
      auto samples = store->LoadSamples(runs->back().id);
      if (samples.ok() && static_cast<int>(samples->size()) >= n && bench.load_input_on()) return runs->back().id;
    }
    return 0;
  }
  // Asks the simulated load over its own link (a fresh TCP connection) or,
  // for a pty that only one client may use at a time, reads its state.
  bool LoadReadsOff() {
    const std::string& a = server->client_addresses()[0];
    if (a.rfind("tcp:", 0) != 0) return !bench.load_input_on();
    auto t = OpenTransport(a);
    if (!t.ok()) return false;
    ScpiOptions so;
    so.timeout = Seconds(0.5);
    so.error_queue = false;
    ScpiSession s(std::move(*t), wall, so);
    auto r = s.Query("INP?");
    return r.ok() && *r == "0";
  }
  // Seconds until the load reads off, polled every 10 ms up to `bound_s`
  // (-1 when it stayed on).
  double SecondsUntilLoadOff(double bound_s) {
    auto t0 = std::chrono::steady_clock::now();
    while (Since(t0) < bound_s) {
      if (LoadReadsOff()) return Since(t0);
      std::this_thread::sleep_for(10ms);
    }
    return -1.0;
  }
  // Waits (bounded) for the run to leave `running` and returns it.
  RunRow WaitForEnd(int64_t id) {
    for (int i = 0; i < 400; ++i) {
      auto store = OpenDb();
      if (store) {
        auto run = store->GetRun(id);
        if (run.ok() && run->outcome != Outcome::kRunning) return *run;
      }
      std::this_thread::sleep_for(25ms);
    }
    return RunRow{};
  }
  std::string Events(int64_t id, const char* kind) {
    auto store = OpenDb();
    std::string out;
    if (!store) return out;
    auto ev = store->LoadEvents(id);
    if (!ev.ok()) return out;
    for (const EventRow& e : *ev)
      if (e.kind == kind) out += e.message + "\n";
    return out;
  }

  testing::TempDir dir;
  std::string rig = dir.File("rig.toml"), proc = dir.File("discharge.kpp"), db = dir.File("guarded.db");
  SteadyClock wall;
  SteadyClock clock{kSpeed};
  sim::SimBench bench{sim::DemoLiIonCell(2.56), clock};
  std::unique_ptr<sim::SimServer> server;
};

// Kills the runner with `signo` once it has logged samples (or lets the
// injected crash do it) and checks the guardian's work.
void ExpectGuardianSwitchesOff(GuardedBench& g, pid_t pid, int signo, const char* expect_in_reason) {
  int64_t run_id = g.WaitForSamples(20);
  ASSERT_NE(run_id, 0) << "the run never logged with the load on";
  if (signo != 0) kill(pid, signo);
  // The runner's death: when it can be waited for (it stays a zombie until
  // then, so the guardian can read how it ended).
  auto t0 = std::chrono::steady_clock::now();
  siginfo_t info{};
  ASSERT_EQ(waitid(P_PID, static_cast<id_t>(pid), &info, WEXITED | WNOWAIT), 0);
  double dead_after_s = Since(t0);
  double off_s = g.SecondsUntilLoadOff(2.0);
  EXPECT_GE(off_s, 0.0) << "the load was still on 2 s after the runner died";
  RunRow run = g.WaitForEnd(run_id);
  int status = 0;
  ASSERT_EQ(waitpid(pid, &status, 0), pid);
  EXPECT_TRUE(WIFSIGNALED(status)) << "the runner was expected to die from a signal";
  EXPECT_EQ(run.outcome, Outcome::kInterrupted) << run.reason;
  EXPECT_NE(run.reason.find(expect_in_reason), std::string::npos) << run.reason;
  EXPECT_NE(run.reason.find("switched off and verified load input 'sim load', supply output 'sim supply'"), std::string::npos)
      << run.reason;
  std::string events = g.Events(run_id, "guardian");
  EXPECT_NE(events.find("load input 'sim load'"), std::string::npos) << events;
  EXPECT_NE(events.find("found on; switched off, verified off by INP?"), std::string::npos) << events;
  EXPECT_NE(events.find("supply output 'sim supply'"), std::string::npos) << events;
  EXPECT_EQ(g.bench.load_trip(), "") << "the load's own watchdog, not the guardian, switched it off";
  std::printf("runner died %.3f s after the signal; load read off %.3f s later; %s\n", dead_after_s, off_s, run.reason.c_str());
}

TEST(Guardian, SigkillOverTcpLeavesTheLoadOffAndTheRunResumable) {
  GuardedBench g("tcp:127.0.0.1:0");
  pid_t pid = g.StartRun();
  ASSERT_GT(pid, 0);
  ExpectGuardianSwitchesOff(g, pid, SIGKILL, "was killed by signal 9 (SIGKILL)");
  auto store = g.OpenDb();
  ASSERT_TRUE(store);
  int64_t run_id = store->ListRuns()->back().id;
  int64_t before = static_cast<int64_t>(store->LoadSamples(run_id)->size());
  store.reset();
  // resume continues the run on the same rig; stopped again by SIGTERM.
  pid_t again = g.Start({"resume", std::to_string(run_id), "--db", g.db, "--rig", g.rig});
  ASSERT_GT(again, 0);
  int64_t now = before;
  for (int i = 0; i < 400 && now < before + 20; ++i) {
    std::this_thread::sleep_for(25ms);
    if (auto s = g.OpenDb()) now = static_cast<int64_t>(s->LoadSamples(run_id)->size());
  }
  EXPECT_GE(now, before + 20) << "resume did not continue the run";
  kill(again, SIGTERM);
  int status = 0;
  ASSERT_EQ(waitpid(again, &status, 0), again);
  EXPECT_TRUE(WIFEXITED(status));
  EXPECT_TRUE(g.LoadReadsOff());
  RunRow run = g.WaitForEnd(run_id);
  EXPECT_EQ(run.outcome, Outcome::kAborted) << run.reason;
  EXPECT_NE(g.Events(run_id, "signal").find("stopped by SIGTERM"), std::string::npos);
  // The outage is counted from the guardian's record of the load it found on.
  const std::string outage = g.Events(run_id, "outage");
  EXPECT_NE(outage.find("method=guardian"), std::string::npos) << outage;
  EXPECT_NE(outage.find("found the load ON"), std::string::npos) << outage;
}

TEST(Guardian, InjectedSegfaultOverPtyIsNamedAndSwitchedOff) {
  GuardedBench g("pty");
  pid_t pid = g.StartRun("SEGV@60");
  ASSERT_GT(pid, 0);
  ExpectGuardianSwitchesOff(g, pid, 0, "crashed: signal 11 (SIGSEGV)");
}

TEST(Guardian, HungRunnerIsKilledAfterTheHangLimit) {
  GuardedBench g("tcp:127.0.0.1:0");
  pid_t pid = g.StartRun(nullptr, {"--hang-limit", "2s"});
  ASSERT_GT(pid, 0);
  int64_t run_id = g.WaitForSamples(20);
  ASSERT_NE(run_id, 0);
  kill(pid, SIGSTOP);  // a runner that no longer moves, still holding its links
  // 2 s limit + up to 1 s heartbeat resolution + 1 s polling, then the off.
  double off_s = g.SecondsUntilLoadOff(8.0);
  EXPECT_GE(off_s, 0.0);
  RunRow run = g.WaitForEnd(run_id);
  int status = 0;
  ASSERT_EQ(waitpid(pid, &status, 0), pid);
  EXPECT_TRUE(WIFSIGNALED(status) && WTERMSIG(status) == SIGKILL);
  EXPECT_EQ(run.outcome, Outcome::kInterrupted);
  EXPECT_NE(run.reason.find("hung (no heartbeat for"), std::string::npos) << run.reason;
  EXPECT_NE(run.reason.find("killed by the guardian"), std::string::npos) << run.reason;
}

TEST(Guardian, SighupTakesTheRunnersOwnSafeOffPath) {
  GuardedBench g("tcp:127.0.0.1:0");
  pid_t pid = g.StartRun();
  int64_t run_id = g.WaitForSamples(20);
  ASSERT_NE(run_id, 0);
  kill(pid, SIGHUP);
  int status = 0;
  ASSERT_EQ(waitpid(pid, &status, 0), pid);
  ASSERT_TRUE(WIFEXITED(status)) << "SIGHUP killed the runner instead of stopping the run";
  EXPECT_TRUE(g.LoadReadsOff());
  RunRow run = g.WaitForEnd(run_id);
  EXPECT_EQ(run.outcome, Outcome::kAborted);
  EXPECT_NE(g.Events(run_id, "signal").find("stopped by SIGHUP"), std::string::npos);
  EXPECT_EQ(g.Events(run_id, "guardian"), "") << "a clean end must leave the guardian idle";
}

TEST(Guardian, ClosedStdoutDoesNotEndTheRun) {
  GuardedBench g("tcp:127.0.0.1:0");
  std::ofstream(g.proc) << "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n"
                           "discharge 1A until time>=40s every=1s\n";
  int fds[2];
  ASSERT_EQ(pipe(fds), 0);
  close(fds[0]);  // nobody will ever read: every write to stdout raises SIGPIPE
  pid_t pid = g.StartRun(nullptr, {}, fds[1], "1s");
  close(fds[1]);
  int status = 0;
  ASSERT_EQ(waitpid(pid, &status, 0), pid);
  ASSERT_TRUE(WIFEXITED(status)) << "the runner died from SIGPIPE";
  EXPECT_EQ(WEXITSTATUS(status), 0);
  auto store = g.OpenDb();
  ASSERT_TRUE(store);
  RunRow run = store->ListRuns()->back();
  EXPECT_EQ(run.outcome, Outcome::kCompleted) << run.reason;
  EXPECT_TRUE(g.LoadReadsOff());
}

// The guardian is a fork and opens its own connection: starting it with the
// database already open in this process is refused.
TEST(Guardian, RefusesToStartWithTheDatabaseOpen) {
  testing::TempDir dir;
  SteadyClock wall;
  auto store = Store::Open(dir.File("open.db"), wall);
  ASSERT_TRUE(store.ok());
  RigFileSpec spec;
  GuardianOptions go;
  go.db_path = dir.File("open.db");
  auto g = Guardian::Start(spec, go);
  ASSERT_FALSE(g.ok());
  EXPECT_NE(g.status().message().find("must be started before the database is opened"), std::string::npos) << g.status().message();
}

// A load that never answers (a listener that accepts nothing): the guardian
// tries for its give-up time, then records the output as NOT verified off,
// and names the runner's exit status.
TEST(Guardian, ALoadThatNeverAnswersIsRecordedAsNotVerified) {
  testing::TempDir dir;
  int listener = socket(AF_INET, SOCK_STREAM, 0);
  sockaddr_in sa{};
  sa.sin_family = AF_INET;
  sa.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  ASSERT_EQ(bind(listener, reinterpret_cast<sockaddr*>(&sa), sizeof sa), 0);
  ASSERT_EQ(listen(listener, 8), 0);
  socklen_t len = sizeof sa;
  getsockname(listener, reinterpret_cast<sockaddr*>(&sa), &len);
  RigFileSpec spec;
  spec.path = dir.File("silent.toml");
  InstrumentSpec load;
  load.name = "mute load";
  load.address = fmt::format("tcp:127.0.0.1:{}", ntohs(sa.sin_port));
  load.roles = {"load"};
  load.timeout_s = 0.2;
  spec.instruments.push_back(load);
  const std::string db = dir.File("silent.db");
  std::fflush(nullptr);
  pid_t runner = fork();
  if (runner == 0) {
    // A runner with a run under way, then gone without a clean end.
    GuardianOptions go;
    go.db_path = db;
    go.give_up_s = 1.0;
    auto guardian = Guardian::Start(spec, go);
    if (!guardian.ok()) _exit(11);
    SteadyClock wall;
    auto store = Store::Open(db, wall);
    if (!store.ok()) _exit(10);
    if (!(*store)->BeginRun(NewRun{"mute-cell", "li-ion", 2500, "p", "p", spec.path}).ok()) _exit(12);
    _exit(3);
  }
  int status = 0;
  ASSERT_EQ(waitpid(runner, &status, 0), runner);
  ASSERT_TRUE(WIFEXITED(status));
  ASSERT_EQ(WEXITSTATUS(status), 3);
  // Reaped already: the guardian cannot read the exit status any more, and says so.
  RunRow run;
  std::string faults;
  for (int i = 0; i < 200 && run.outcome != Outcome::kInterrupted; ++i) {
    std::this_thread::sleep_for(25ms);
    SteadyClock wall;
    Store::Options o;
    o.create = false;
    auto store = Store::Open(db, wall, o);
    if (!store.ok()) continue;
    auto r = (*store)->GetRun(1);
    if (r.ok()) run = *r;
    auto ev = (*store)->LoadEvents(1);
    faults.clear();
    if (ev.ok())
      for (const EventRow& e : *ev)
        if (e.kind == "fault") faults += e.message;
  }
  close(listener);
  EXPECT_EQ(run.outcome, Outcome::kInterrupted);
  EXPECT_NE(run.reason.find("could NOT verify every output off"), std::string::npos) << run.reason;
  EXPECT_TRUE(run.reason.find("exited with status 3") != std::string::npos ||
              run.reason.find("its exit status was already collected") != std::string::npos)
      << run.reason;
  EXPECT_NE(faults.find("load input 'mute load'"), std::string::npos) << faults;
  EXPECT_NE(faults.find("NOT verified off after 1 s"), std::string::npos) << faults;
  EXPECT_NE(faults.find("no state reply to INP?"), std::string::npos) << faults;
}

// A clean end with the load still on (the runner's off command lost on the
// way): the guardian's own check after the runner has closed its links finds
// it on, switches it off and notes it; the outcome stays the runner's.
TEST(Guardian, ALoadLeftOnAtACleanEndIsFoundAndSwitchedOff) {
  GuardedBench g("tcp:127.0.0.1:0");
  auto spec = LoadRigFile(g.rig);
  ASSERT_TRUE(spec.ok()) << spec.status().ToString();
  std::fflush(nullptr);
  pid_t runner = fork();
  if (runner == 0) {
    GuardianOptions go;
    go.db_path = g.db;
    auto guardian = Guardian::Start(*spec, go);
    if (!guardian.ok()) _exit(11);
    {
      SteadyClock wall;
      auto store = Store::Open(g.db, wall);
      if (!store.ok()) _exit(10);
      auto id = (*store)->BeginRun(NewRun{"left-on", "li-ion", 2500, "p", "p", g.rig});
      if (!id.ok()) _exit(12);
      auto t = OpenTransport(g.server->client_addresses()[0]);
      if (!t.ok()) _exit(13);
      ScpiSession s(std::move(*t), wall);
      if (!s.Write("CURR 0.5").ok() || !s.Write("INP ON").ok()) _exit(14);
      auto on = s.Query("INP?");
      if (!on.ok() || *on != "1") _exit(14);
      if (!(*store)->FinishRun(*id, Outcome::kCompleted, "procedure complete").ok()) _exit(15);
    }  // links and database closed, the load still on
    (*guardian)->CleanEnd();
    _exit(0);
  }
  int status = 0;
  ASSERT_EQ(waitpid(runner, &status, 0), runner);
  ASSERT_TRUE(WIFEXITED(status));
  ASSERT_EQ(WEXITSTATUS(status), 0);
  EXPECT_GE(g.SecondsUntilLoadOff(2.0), 0.0) << "the load was left on";
  std::string notes;
  for (int i = 0; i < 100 && notes.empty(); ++i) {
    std::this_thread::sleep_for(25ms);
    notes = g.Events(1, "guardian");
  }
  EXPECT_NE(notes.find("after the runner's own end, load input 'sim load'"), std::string::npos) << notes;
  EXPECT_NE(notes.find("was found ON; switched off, verified off by INP?"), std::string::npos) << notes;
  EXPECT_EQ(notes.find("supply"), std::string::npos) << "the supply was off: nothing to note";
  auto store = g.OpenDb();
  ASSERT_TRUE(store);
  EXPECT_EQ(store->GetRun(1)->outcome, Outcome::kCompleted);
}

// The guardian itself killed: the runner does not go on unwatched but stops
// the run through its own safe-off path.
TEST(Guardian, ARunWhoseGuardianDiesStopsWithTheLoadOff) {
  GuardedBench g("tcp:127.0.0.1:0");
  pid_t pid = g.StartRun();
  int64_t run_id = g.WaitForSamples(20);
  ASSERT_NE(run_id, 0);
  std::ifstream children(fmt::format("/proc/{}/task/{}/children", pid, pid));
  pid_t guardian = 0;
  children >> guardian;
  ASSERT_GT(guardian, 0) << "no guardian process under the runner";
  kill(guardian, SIGKILL);
  int status = 0;
  ASSERT_EQ(waitpid(pid, &status, 0), pid);
  ASSERT_TRUE(WIFEXITED(status));
  EXPECT_TRUE(g.LoadReadsOff());
  RunRow run = g.WaitForEnd(run_id);
  EXPECT_EQ(run.outcome, Outcome::kAborted);
  EXPECT_NE(run.reason.find("the guardian process ended"), std::string::npos) << run.reason;
}

}  // namespace
}  // namespace kp
