// The user's configuration file: found by the XDG rules, values used, options
// override them, mistakes named with file:line:col.
#include <gtest/gtest.h>

#include <cstdlib>
#include <fstream>

#include "rig/config.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"
#include "ui/cli/cli.h"

namespace kp {
namespace {

// Sets an environment variable for one test and restores it afterwards.
class EnvVar {
 public:
  EnvVar(const char* name, const char* value) : name_(name) {
    if (const char* old = std::getenv(name)) old_ = old;
    if (value) setenv(name, value, 1);
    else unsetenv(name);
  }
  ~EnvVar() {
    if (old_) setenv(name_, old_->c_str(), 1);
    else unsetenv(name_);
  }

 private:
  const char* name_;
  std::optional<std::string> old_;
};

TEST(UserConfig, FollowsTheXdgRules) {
  // XDG Base Directory Specification 0.8: $XDG_CONFIG_HOME, else $HOME/.config.
  EnvVar c("KNEEPOINT_CONFIG", nullptr);
  {
    EnvVar x("XDG_CONFIG_HOME", "/srv/cfg");
    EXPECT_EQ(ConfigPath(), "/srv/cfg/kneepoint/config.toml");
  }
  {
    EnvVar x("XDG_CONFIG_HOME", nullptr);
    EnvVar h("HOME", "/home/tech");
    EXPECT_EQ(ConfigPath(), "/home/tech/.config/kneepoint/config.toml");
  }
  {
    // A relative $XDG_CONFIG_HOME is invalid per the specification and ignored.
    EnvVar x("XDG_CONFIG_HOME", "relative/dir");
    EnvVar h("HOME", "/home/tech");
    EXPECT_EQ(ConfigPath(), "/home/tech/.config/kneepoint/config.toml");
  }
  EnvVar k("KNEEPOINT_CONFIG", "/etc/kneepoint.toml");
  EXPECT_EQ(ConfigPath(), "/etc/kneepoint.toml");
}

TEST(UserConfig, ValuesAreUsedAndOptionsOverrideThem) {
  testing::TempDir dir;
  std::string file = (dir.path() / "config.toml").string();
  {
    std::ofstream out(file);
    out << "bench = \"bench-3\"\noperator = \"R. Okafor\"\ndatabase = \"/srv/lab/bench-3.db\"\n"
           "dialect_path = [\"/srv/lab/dialects\", \"/opt/more\"]\n";
  }
  EnvVar k("KNEEPOINT_CONFIG", file.c_str());
  auto c = LoadUserConfig();
  ASSERT_TRUE(c.ok()) << c.status().ToString();
  EXPECT_EQ(c->bench, "bench-3");
  EXPECT_EQ(c->operator_name, "R. Okafor");
  EXPECT_FALSE(c->rig.has_value());
  ASSERT_EQ(c->dialect_path.size(), 2u);
  EXPECT_EQ(c->dialect_path[1], "/opt/more");
  EXPECT_EQ(ChooseDatabase("", *c), "/srv/lab/bench-3.db");
  EXPECT_EQ(ChooseDatabase("mine.db", *c), "mine.db");
  EXPECT_EQ(ChooseDatabase("", UserConfig{}), kDefaultDatabase);
}

TEST(UserConfig, MissingFileIsAnEmptyConfiguration) {
  testing::TempDir dir;
  EnvVar k("KNEEPOINT_CONFIG", (dir.path() / "none.toml").c_str());
  auto c = LoadUserConfig();
  ASSERT_TRUE(c.ok());
  EXPECT_FALSE(c->bench.has_value());
  EXPECT_TRUE(c->file.empty());
}

TEST(UserConfig, MistakesNameFileLineAndColumn) {
  auto unknown = ParseUserConfig("bench = \"b\"\noperater = \"x\"\n", "cfg.toml");
  ASSERT_FALSE(unknown.ok());
  EXPECT_NE(unknown.status().message().find("cfg.toml:2:1: operater: unknown key"), std::string::npos)
      << unknown.status().message();
  auto number = ParseUserConfig("database = 3\n", "cfg.toml");
  ASSERT_FALSE(number.ok());
  EXPECT_NE(number.status().message().find("cfg.toml:1:"), std::string::npos) << number.status().message();
  auto broken = ParseUserConfig("bench = \"b\nx", "cfg.toml");
  ASSERT_FALSE(broken.ok());
  EXPECT_EQ(broken.status().message().rfind("cfg.toml:1:", 0), 0u) << broken.status().message();
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

using Captured = testing::CliResult;
Captured Kneepoint(std::vector<std::string> args) { return testing::RunKneepointCaptured(std::move(args)); }

TEST(UserConfig, CommandsTakeTheirDatabaseFromItUnlessTold) {
  testing::TempDir dir;
  std::string file = dir.File("config.toml");
  std::string configured = dir.File("bench-3.db");
  {
    std::ofstream out(file);
    out << "database = \"" << configured << "\"\n";
  }
  EnvVar k("KNEEPOINT_CONFIG", file.c_str());
  // The configured database does not exist: `runs` names it.
  Captured r = Kneepoint({"runs"});
  EXPECT_EQ(r.code, cli::kExitBadInput);
  EXPECT_NE(r.err.find(configured), std::string::npos) << r.err;
  // An option wins over the file.
  std::string other = dir.File("other.db");
  r = Kneepoint({"runs", "--db", other});
  EXPECT_NE(r.err.find(other), std::string::npos) << r.err;
  EXPECT_EQ(r.err.find(configured), std::string::npos) << r.err;
  // A broken configuration stops every command with its file:line:col.
  {
    std::ofstream out(file);
    out << "databse = \"x.db\"\n";
  }
  r = Kneepoint({"runs"});
  EXPECT_EQ(r.code, cli::kExitBadInput);
  EXPECT_NE(r.err.find(file + ":1:1: databse: unknown key"), std::string::npos) << r.err;
}

}  // namespace
}  // namespace kp
