// The shipped data files are found relative to the running program (the
// build tree's share/kneepoint here), or where KNEEPOINT_DATA_DIR says.
#include <gtest/gtest.h>

#include <cstdlib>
#include <filesystem>

#include "drivers/data_dir.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

namespace fs = std::filesystem;

TEST(DataDir, FoundBesideTheProgramInTheBuildTree) {
  unsetenv("KNEEPOINT_DATA_DIR");
  auto d = DataDir();
  ASSERT_TRUE(d.has_value()) << "program folder " << ProgramDir();
  // The build tree's share/kneepoint holds links to the source folders.
  for (const char* sub : {"profiles", "presets", "procedures", "rigs"}) EXPECT_TRUE(DataSubdir(sub).has_value()) << sub;
  EXPECT_TRUE(fs::exists(*DataSubdir("presets") / "li_ion.toml"));
  EXPECT_FALSE(DataSubdir("no-such-folder").has_value());
}

TEST(DataDir, EnvironmentVariableWinsAndIsNeverSilentlyReplaced) {
  testing::TempDir dir;
  fs::create_directories(dir.path() / "profiles");
  setenv("KNEEPOINT_DATA_DIR", dir.path().c_str(), 1);
  EXPECT_EQ(DataDir(), dir.path());
  EXPECT_EQ(DataSubdir("profiles"), dir.path() / "profiles");
  EXPECT_FALSE(DataSubdir("presets").has_value());
  // Named but missing: no data folder, not a fallback somewhere else.
  setenv("KNEEPOINT_DATA_DIR", (dir.path() / "missing").c_str(), 1);
  EXPECT_FALSE(DataDir().has_value());
  unsetenv("KNEEPOINT_DATA_DIR");
}

}  // namespace
}  // namespace kp
