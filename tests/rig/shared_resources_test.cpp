// Shared resources: the rig lock keys on the device (two spellings of one
// address are one rig), its folder and files are never followed through a
// planted symlink, and no command writes its output over the database.
#include <gtest/gtest.h>
#include <sys/stat.h>
#include <unistd.h>

#include <filesystem>
#include <fstream>

#include "drivers/address.h"
#include "rig/device_identity.h"
#include "rig/run_controller.h"
#include "rig/run_lock.h"
#include "rig/sim_rig.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"
#include "ui/cli/cli.h"

namespace kp {
namespace {

std::string Slurp(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), {});
}

std::string IdentityOf(const std::string& text) {
  Result<Address> a = ParseAddress(text);
  EXPECT_TRUE(a.ok()) << text;
  return a.ok() ? DeviceIdentity(*a) : text;
}

TEST(DeviceIdentity, TwoSpellingsOfOneAddressAreOneDevice) {
  EXPECT_EQ(IdentityOf("tcp:localhost:5025"), IdentityOf("tcp:127.0.0.1:5025"));
  EXPECT_EQ(IdentityOf("tcp:127.0.0.1:5025"), "tcp:loopback:5025");
  EXPECT_NE(IdentityOf("tcp:127.0.0.1:5025"), IdentityOf("tcp:127.0.0.1:5026"));
}

TEST(DeviceIdentity, ASerialDeviceIsKeyedByItsRealPath) {
  testing::TempDir dir;
  std::ofstream(dir.File("ttyFAKE0")) << "";
  std::filesystem::create_symlink(dir.File("ttyFAKE0"), dir.File("by-id-link"));
  EXPECT_EQ(IdentityOf("serial:" + dir.File("by-id-link")), IdentityOf("serial:" + dir.File("ttyFAKE0")));
}

TEST(RunLockSafety, TwoSpellingsOfOneLoadCannotBeDrivenTwice) {
  testing::TempDir dir;
  auto first = RunLock::Acquire(IdentityOf("tcp:localhost:5025"), "run 1", dir.File("locks"));
  ASSERT_TRUE(first.ok()) << first.status().ToString();
  auto second = RunLock::Acquire(IdentityOf("tcp:127.0.0.1:5025"), "run 2", dir.File("locks"));
  ASSERT_FALSE(second.ok());
  EXPECT_EQ(second.status().code(), StatusCode::kUnavailable);
}

TEST(RunLockSafety, APlantedSymlinkIsNeverWrittenThrough) {
  testing::TempDir dir;
  const std::string locks = dir.File("locks");
  ASSERT_OK(CheckLockDir(locks));
  const std::string victim = dir.File("precious.txt");
  std::ofstream(victim) << "keep me";
  std::filesystem::create_symlink(victim, std::filesystem::path(locks) / RunLockFileName("tcp:loopback:5025"));
  auto lock = RunLock::Acquire("tcp:loopback:5025", "run 1", locks);
  ASSERT_FALSE(lock.ok());
  EXPECT_NE(lock.status().message().find("symbolic link"), std::string::npos) << lock.status().message();
  EXPECT_EQ(Slurp(victim), "keep me");
}

TEST(RunLockSafety, ASymlinkedLockFolderIsRefused) {
  testing::TempDir dir;
  std::filesystem::create_directory(dir.File("elsewhere"));
  std::filesystem::create_directory_symlink(dir.File("elsewhere"), dir.File("locks"));
  auto lock = RunLock::Acquire("sim", "run 1", dir.File("locks"));
  ASSERT_FALSE(lock.ok());
  EXPECT_NE(lock.status().message().find("symbolic link"), std::string::npos) << lock.status().message();
}

TEST(RunLockSafety, AWorldWritableLockFolderWithoutStickyBitIsRefused) {
  testing::TempDir dir;
  const std::string locks = dir.File("locks");
  ASSERT_EQ(mkdir(locks.c_str(), 0700), 0);
  ASSERT_EQ(chmod(locks.c_str(), 0777), 0);
  EXPECT_FALSE(RunLock::Acquire("sim", "run 1", locks).ok());
  ASSERT_EQ(chmod(locks.c_str(), 01777), 0);
  EXPECT_TRUE(RunLock::Acquire("sim", "run 1", locks).ok());
}

TEST(RunLockSafety, TheDefaultFolderIsPrivateToTheUser) {
  testing::TempDir dir;
  const char* old = std::getenv("XDG_RUNTIME_DIR");
  const std::string saved = old != nullptr ? old : "";
  const char* lock_env = std::getenv("KNEEPOINT_LOCK_DIR");
  const std::string saved_lock = lock_env != nullptr ? lock_env : "";
  unsetenv("KNEEPOINT_LOCK_DIR");
  setenv("XDG_RUNTIME_DIR", dir.path().c_str(), 1);
  EXPECT_EQ(RunLock::DefaultDir(), dir.File("kneepoint"));
  auto lock = RunLock::Acquire("sim", "run 1");
  EXPECT_TRUE(lock.ok()) << lock.status().ToString();
  struct stat st {};
  ASSERT_EQ(stat(dir.File("kneepoint").c_str(), &st), 0);
  EXPECT_EQ(st.st_mode & 0777, 0700u);
  ASSERT_EQ(stat((*lock)->path().c_str(), &st), 0);
  EXPECT_EQ(st.st_mode & 0077, 0u);
  lock->reset();
  if (old != nullptr) setenv("XDG_RUNTIME_DIR", saved.c_str(), 1); else unsetenv("XDG_RUNTIME_DIR");
  if (lock_env != nullptr) setenv("KNEEPOINT_LOCK_DIR", saved_lock.c_str(), 1);
}

int64_t ShortRun(const std::string& db) {
  SteadyClock wall;
  VirtualClock clock;
  auto store = Store::Open(db, wall);
  EXPECT_TRUE(store.ok());
  SimRig rig(clock, sim::DemoLiIonCell(2.56));
  RunController rc(**store, clock, rig.roles());
  auto r = rc.Execute(testing::CompileForCell2500("discharge 1A until time>=60s every=1s\n"), {});
  EXPECT_TRUE(r.ok());
  return r.ok() ? r->run_id : 0;
}

TEST(OutputGuard, ReportAndExportRefuseToWriteOverTheDatabase) {
  testing::TempDir dir;
  const std::string db = dir.File("lab.db");
  int64_t run = ShortRun(db);
  size_t stored = 0;
  {
    SteadyClock wall;
    auto store = Store::Open(db, wall);
    ASSERT_TRUE(store.ok());
    stored = (*store)->LoadSamples(run)->size();
    ASSERT_GT(stored, 50u);
  }
  const std::string id = std::to_string(run);
  EXPECT_EQ(testing::RunKneepoint({"report", id, "--db", db, "--html", db}), cli::kExitBadInput);
  EXPECT_EQ(testing::RunKneepoint({"report", id, "--db", db, "--csv", db + "-wal"}), cli::kExitBadInput);
  EXPECT_EQ(testing::RunKneepoint({"export", id, "--db", db, "--csv", db}), cli::kExitBadInput);
  EXPECT_EQ(testing::RunKneepoint({"export", id, "--db", db, "--json", dir.File("./lab.db")}), cli::kExitBadInput);
  // Through a symlink, too.
  std::filesystem::create_symlink(db, dir.File("innocent.html"));
  EXPECT_EQ(testing::RunKneepoint({"report", id, "--db", db, "--html", dir.File("innocent.html")}), cli::kExitBadInput);
  EXPECT_EQ(testing::RunKneepoint({"compare", id, "--db", db, "--csv", db}), cli::kExitBadInput);
  // The database is whole: same run, same samples.
  SteadyClock wall;
  auto store = Store::Open(db, wall);
  ASSERT_TRUE(store.ok()) << store.status().ToString();
  auto samples = (*store)->LoadSamples(run);
  ASSERT_TRUE(samples.ok()) << samples.status().ToString();
  EXPECT_EQ(samples->size(), stored);
  // Another file is fine.
  EXPECT_EQ(testing::RunKneepoint({"export", id, "--db", db, "--csv", dir.File("out.csv")}), cli::kExitOk);
}

}  // namespace
}  // namespace kp
