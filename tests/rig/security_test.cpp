// Security basics: text that looks like SQL goes through every store entry
// point and comes back verbatim (statements are prepared with bound
// parameters); files the tool writes follow the user's umask; the simulator
// listens on loopback unless told otherwise, and warns when it is not.
#include <gtest/gtest.h>

#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <string>
#include <vector>

#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"
#include "ui/cli/cli.h"

namespace kp {
namespace {

const std::vector<std::string> kHostile = {
    "O'Brien \"cell\"",
    "x'); DROP TABLE samples; --",
    "1; DELETE FROM runs WHERE 1=1",
    "' OR '1'='1",
    "%s %n \\ \\' ;--",
    "name\nwith\nnewlines\tand tabs",
    "Robert'); UPDATE runs SET outcome='completed' WHERE ('1'='1",
};

TEST(Security, HostileTextGoesInAndComesBackVerbatimThroughEveryEntryPoint) {
  testing::TempDir dir;
  SteadyClock wall;
  auto store = Store::Open(dir.File("s.db"), wall);
  ASSERT_TRUE(store.ok());
  Store& s = **store;
  for (const std::string& h : kHostile) {
    SCOPED_TRACE(h);
    NewRun nr;
    nr.cell_name = h;
    nr.chemistry = h + "-chem";
    nr.procedure_name = h + "-proc";
    nr.procedure_text = h + "-text";
    nr.rig = h + "-rig";
    nr.rated_mah = 2500;
    auto id = s.BeginRun(nr);
    ASSERT_TRUE(id.ok()) << id.status().ToString();
    ASSERT_OK(s.AppendSample(*id, Sample{0.0, 3.7, 0.5, 25.0, 0}));
    ASSERT_OK(s.BeginStep(*id, 0, h + "-kind", h + "-label", 0.0));
    ASSERT_OK(s.AddEvent(*id, 0.5, h + "-event", h + "-message"));
    ASSERT_OK(s.EndStep(*id, 1.0, h + "-end"));
    auto req = s.AddRequest(*id, "abort", h + "-who");
    ASSERT_TRUE(req.ok()) << req.status().ToString();
    ASSERT_OK(s.FinishRun(*id, Outcome::kAborted, h + "-reason"));
    ASSERT_OK(s.Commit());

    auto run = s.GetRun(*id);
    ASSERT_TRUE(run.ok());
    EXPECT_EQ(run->cell, h);
    EXPECT_EQ(run->chemistry, h + "-chem");
    EXPECT_EQ(run->procedure_name, h + "-proc");
    EXPECT_EQ(run->procedure_text, h + "-text");
    EXPECT_EQ(run->rig, h + "-rig");
    EXPECT_EQ(run->reason, h + "-reason");
    EXPECT_EQ(run->outcome, Outcome::kAborted);
    auto steps = s.LoadSteps(*id);
    ASSERT_TRUE(steps.ok());
    ASSERT_EQ(steps->size(), 1u);
    EXPECT_EQ((*steps)[0].kind, h + "-kind");
    EXPECT_EQ((*steps)[0].label, h + "-label");
    EXPECT_EQ((*steps)[0].end_reason, h + "-end");
    auto events = s.LoadEvents(*id);
    ASSERT_TRUE(events.ok());
    bool found = false;
    for (const EventRow& e : *events) found |= e.kind == h + "-event" && e.message == h + "-message";
    EXPECT_TRUE(found);
    auto pending = s.PendingRequests(*id);
    ASSERT_TRUE(pending.ok());
    ASSERT_EQ(pending->size(), 1u);
    EXPECT_EQ((*pending)[0].requested_by, h + "-who");
  }
  // Nothing was dropped or rewritten by the text: every run and sample is there.
  auto runs = s.ListRuns();
  ASSERT_TRUE(runs.ok());
  EXPECT_EQ(runs->size(), kHostile.size());
  for (const RunRow& r : *runs) {
    EXPECT_EQ(r.outcome, Outcome::kAborted);
    EXPECT_EQ(s.LoadSamples(r.id)->size(), 1u);
  }
}

// In a child with the given umask: a short logged run, then `export --csv`
// and `report --html`. Returns the three files' permission bits (or -1).
struct Modes {
  int db = -1, csv = -1, html = -1;
};

Modes WriteFilesUnderUmask(mode_t mask, const testing::TempDir& dir, const std::string& tag) {
  const std::string db = dir.File(tag + ".db"), csv = dir.File(tag + ".csv"), html = dir.File(tag + ".html");
  pid_t pid = fork();
  if (pid == 0) {
    umask(mask);
    {
      SteadyClock wall;
      VirtualClock clock;
      auto store = Store::Open(db, wall);
      if (!store.ok()) _exit(2);
      SimRig rig(clock, sim::DemoLiIonCell(2.56));
      Plan p = RatedCapacityPlan(testing::Cell2500());
      p.steps[0].end.time_s = 60;
      RunController rc(**store, clock, rig.roles());
      RunOptions o;
      o.cell_name = "umask-cell";
      auto r = rc.Execute(p, o);
      if (!r.ok()) _exit(3);
    }
    auto cli = [](std::vector<std::string> args) { return testing::RunKneepoint(std::move(args)); };
    if (cli({"export", "1", "--db", db, "--csv", csv}) != cli::kExitOk) _exit(4);
    if (cli({"report", "1", "--db", db, "--html", html}) != cli::kExitOk) _exit(5);
    _exit(0);
  }
  int status = 0;
  waitpid(pid, &status, 0);
  EXPECT_TRUE(WIFEXITED(status) && WEXITSTATUS(status) == 0) << "child status " << status;
  Modes m;
  struct stat st {};
  if (stat(db.c_str(), &st) == 0) m.db = static_cast<int>(st.st_mode & 0777);
  if (stat(csv.c_str(), &st) == 0) m.csv = static_cast<int>(st.st_mode & 0777);
  if (stat(html.c_str(), &st) == 0) m.html = static_cast<int>(st.st_mode & 0777);
  return m;
}

TEST(Security, FilesWrittenFollowTheUmask) {
  testing::TempDir dir;
  Modes tight = WriteFilesUnderUmask(077, dir, "tight");
  EXPECT_EQ(tight.db, 0600) << std::oct << tight.db;
  EXPECT_EQ(tight.csv, 0600) << std::oct << tight.csv;
  EXPECT_EQ(tight.html, 0600) << std::oct << tight.html;
  // And nothing narrower than asked for under the usual umask.
  Modes usual = WriteFilesUnderUmask(022, dir, "usual");
  EXPECT_EQ(usual.db, 0640) << std::oct << usual.db;  // databases: 0640 at most (rig/sqlite.cpp)
  EXPECT_EQ(usual.csv, 0644) << std::oct << usual.csv;
  EXPECT_EQ(usual.html, 0644) << std::oct << usual.html;
}

// Runs `kneepoint sim --listen ADDRESS` in a child until it has printed its
// banner, stops it with SIGTERM and returns what it printed.
std::string SimBanner(const std::string& address) {
  int fds[2];
  EXPECT_EQ(pipe2(fds, O_CLOEXEC), 0);  // the child keeps only its stdout end
  testing::SpawnIo io;
  io.stdout_fd = fds[1];
  pid_t pid = testing::SpawnKneepoint({"sim", "--listen", address}, {}, io);
  EXPECT_GT(pid, 0);
  close(fds[1]);
  std::string out;
  auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(20);
  while (out.find("Ctrl-C stops") == std::string::npos && std::chrono::steady_clock::now() < deadline) {
    pollfd p{fds[0], POLLIN, 0};
    if (poll(&p, 1, 100) <= 0) continue;
    char buf[512];
    ssize_t n = read(fds[0], buf, sizeof buf);
    if (n <= 0) break;
    out.append(buf, static_cast<size_t>(n));
  }
  kill(pid, SIGTERM);
  int status = 0;
  waitpid(pid, &status, 0);
  close(fds[0]);
  return out;
}

TEST(Security, SimulatorSaysWhenItListensBeyondLoopback) {
  std::string open = SimBanner("tcp:0.0.0.0:0");
  EXPECT_NE(open.find("WARNING: listening on 0.0.0.0"), std::string::npos) << open;
  EXPECT_NE(open.find("no authentication"), std::string::npos) << open;
  std::string local = SimBanner("tcp:127.0.0.1:0");
  EXPECT_NE(local.find("loopback only"), std::string::npos) << local;
  EXPECT_EQ(local.find("WARNING"), std::string::npos) << local;
}

}  // namespace
}  // namespace kp
