// Fixtures several suites share: the cell most procedures in the tests
// describe, and a store in a fresh folder with the clocks a run needs.
#pragma once

#include <sys/types.h>

#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include "analysis/sample.h"
#include "drivers/clock.h"
#include "procedures/plan.h"
#include "rig/store.h"
#include "tests/support/test_support.h"

namespace kp::testing {

// Runs `kneepoint ARGS...` in this process, as main() would; returns the exit code.
int RunKneepoint(std::vector<std::string> args);

// The same with stdout and stderr captured (GoogleTest's capture), for tests
// that check what a command prints.
struct CliResult {
  int code = 0;
  std::string out, err;
};
CliResult RunKneepointCaptured(std::vector<std::string> args);

// `kneepoint ARGS...` in a child process: this test program executed again
// with KP_TEST_EXEC_CLI set (tests/support/test_main.cpp), never a plain fork,
// so no lock held by another thread of this process reaches the child.
// `env` adds NAME=VALUE entries to this process's environment; `stdout_fd`
// and `stderr_fd` >= 0 become the child's; "/dev/null" is spelled -2.
// Returns the child's pid (waitpid it), or -1 when it could not be started.
struct SpawnIo {
  int stdout_fd = -1;
  int stderr_fd = -1;
  static constexpr int kDevNull = -2;
};
pid_t SpawnKneepoint(const std::vector<std::string>& args, const std::vector<std::string>& env = {}, SpawnIo io = {});

// A 2,500 mAh Li-ion cell: 3.6 V nominal, 4.2 V full, 2.75 V cutoff, 60 degC
// limit (the simulator's DemoLiIonCell(2.56) stands in for it).
CellSpec Cell2500();
// Its cell line in procedure syntax, and a procedure body compiled under it
// (a test failure, with the diagnostics, when it does not compile).
inline constexpr const char* kCell2500Line =
    "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n";
Plan CompileForCell2500(const std::string& body);

// A store in a fresh temporary folder, its wall clock real-time, plus a
// virtual clock for the runs driven against it.
struct StoreFixture {
  explicit StoreFixture(const std::string& file = "run.db");
  // Every sample of `run_id` (empty, and a test failure, when unreadable).
  std::vector<Sample> Samples(int64_t run_id);

  TempDir dir;
  SteadyClock wall;
  VirtualClock clock;
  std::unique_ptr<Store> store;
};

}  // namespace kp::testing
