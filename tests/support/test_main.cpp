// The main() of every test program: GoogleTest, or, when KP_TEST_EXEC_CLI is
// set, the command line itself (`kneepoint ARGS...`). testing::SpawnKneepoint
// starts a child that way, by executing this program again rather than
// forking it: a forked child of a test with threads (a simulator serving TCP)
// can inherit a lock another thread held, and the sanitizers' allocator once
// hung a child so.
#include <gtest/gtest.h>

#include <cstdlib>

#include "ui/cli/cli.h"

int main(int argc, char** argv) {
  if (const char* v = std::getenv("KP_TEST_EXEC_CLI"); v != nullptr && *v != '\0') {
    ::unsetenv("KP_TEST_EXEC_CLI");
    return kp::cli::RunCli(argc, argv);
  }
  ::testing::InitGoogleTest(&argc, argv);
  return RUN_ALL_TESTS();
}
