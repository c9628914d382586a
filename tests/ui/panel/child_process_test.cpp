#include "ui/panel/child_process.h"

#include <gtest/gtest.h>

#include <signal.h>

#include <fstream>
#include <thread>

#include "tests/support/test_support.h"

namespace kp::ui {
namespace {

TEST(ChildProcess, CapturesOutputAndExitCode) {
  auto r = CaptureOutput({"/bin/sh", "-c", "echo plan line; echo problem >&2; exit 3"});
  ASSERT_OK(r.status());
  EXPECT_EQ(r->exit_code, 3);
  EXPECT_NE(r->output.find("plan line"), std::string::npos);
  EXPECT_NE(r->output.find("problem"), std::string::npos);
  auto missing = CaptureOutput({"/nonexistent/kneepoint-check"});
  ASSERT_OK(missing.status());
  EXPECT_EQ(missing->exit_code, 127);
}

// The runner is started in its own session and reports the pid that really
// runs the command (not the intermediate fork).
TEST(ChildProcess, SpawnsDetachedWithLog) {
  testing::TempDir dir;
  std::string log = dir.File("runs.log");
  auto pid = SpawnDetached({"/bin/sh", "-c", "echo pid $$ sid $(ps -o sid= -p $$ | tr -d ' ')"}, log);
  ASSERT_OK(pid.status());
  ASSERT_GT(*pid, 0);
  std::string text;
  for (int i = 0; i < 500 && text.find('\n') == std::string::npos; ++i) {  // up to ~5 s for the child to write
    std::ifstream in(log);
    std::getline(in, text, '\0');
    std::this_thread::sleep_for(std::chrono::milliseconds(10));
  }
  EXPECT_NE(text.find("pid " + std::to_string(*pid)), std::string::npos) << text;
  EXPECT_EQ(text.find("sid " + std::to_string(getsid(0)) + "\n"), std::string::npos) << "runner shares the panel's session";
  EXPECT_EQ(SelfExecutable().empty(), false);
}

}  // namespace
}  // namespace kp::ui
