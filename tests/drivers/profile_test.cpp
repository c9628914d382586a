#include "drivers/profile.h"

#include <filesystem>
#include <fstream>

#include <gtest/gtest.h>

#include "tests/support/test_support.h"

namespace kp {
namespace {

TEST(Profile, ShippedProfilesLoadAndFillTheirRoles) {
  // The shipped folder is found the way a rig file finds it: by name.
  auto shipped = FindProfile("generic-scpi-dmm", "/nonexistent");
  ASSERT_TRUE(shipped.ok()) << shipped.status().ToString();
  int n = 0;
  for (const auto& e : std::filesystem::directory_iterator(std::filesystem::path(*shipped).parent_path())) {
    if (e.path().extension() != ".kpd") continue;
    ++n;
    auto p = LoadProfileFile(e.path().string());
    ASSERT_TRUE(p.ok()) << p.status().ToString();
    EXPECT_FALSE(p->roles.empty()) << e.path();
  }
  EXPECT_GE(n, 5);
  auto found = FindProfile("generic-scpi-load", "/nonexistent");
  ASSERT_TRUE(found.ok()) << found.status().ToString();
  auto load = LoadProfileFile(*found);
  ASSERT_TRUE(load.ok());
  EXPECT_EQ(load->load.mode_power, "FUNC POW");
  EXPECT_EQ(load->load.set_resistance, "RES {}");
  EXPECT_EQ(load->load.under_voltage_backstop, "VOLT:PROT:LOW {}");
  EXPECT_TRUE(load->load.remote_sense_on.empty());  // written as `none`
}

TEST(Profile, ChannelAndIdentity) {
  auto p = ParseProfile(
      "roles = [\"thermometer\"]\nidentity = \"*,TEMP-LOGGER*\"\n[commands]\nread-temperature = \"MEAS:TEMP? TC,K,(@{ch})\"\n",
      "t.kpd");
  ASSERT_TRUE(p.ok()) << p.status().ToString();
  ApplyChannel(*p, "103");
  EXPECT_EQ(p->thermometer.measure_temperature, "MEAS:TEMP? TC,K,(@103)");
  EXPECT_TRUE(IdentityMatches(p->identity, "Some Maker,temp-logger 8,SN1,1.0"));
  EXPECT_FALSE(IdentityMatches(p->identity, "Some Maker,DMM,SN1,1.0"));
  EXPECT_TRUE(IdentityMatches("Kneepoint Simulation,*", "Kneepoint Simulation,KP-SIM-LOAD,SN0001,1.0"));
  EXPECT_TRUE(IdentityMatches("*LOAD?SN*", "x,KP-SIM-LOAD,SN0001"));
  EXPECT_FALSE(IdentityMatches("*LOAD", "x,KP-SIM-LOAD,SN0001"));
}

TEST(Profile, MalformedGivesFileLineAndKey) {
  struct Case {
    const char* text;
    const char* says;
  } cases[] = {
      {"roles = [\"load\"]\n[commands]\ncc-select FUNC CURR\n", "bad.kpd:3:"},
      {"roles = [\"load\", \"oven\"]\n", "bad.kpd:1: key 'roles': unknown role 'oven'"},
      {"roles = [\"lod\"]\n", "unknown role 'lod': did you mean 'load'?"},
      {"roles = \"load\"\n", "bad.kpd:1: key 'roles': a list of roles"},
      {"roles = [\"meter\"]\n\n# c\n[commands]\nmeter-read-voltage = \"MEAS:VOLT?\"\nmeter-read-voltage = \"READ?\"\n", "bad.kpd:6:"},
      {"roles = [\"meter\"]\n[commands]\nmeter-read-voltage = \"MEAS:VOLT\"\n", "bad.kpd:3: key 'meter-read-voltage': 'MEAS:VOLT' is a reading and must be a query"},
      {"roles = [\"meter\"]\n[commands]\nmeter-read-voltage = \"MEAS:VOLT?\"\nread-temperature = \"MEAS:TEMP?\"\n", "bad.kpd:4: key 'read-temperature': belongs to role 'thermometer'"},
      {"roles = [\"meter\"]\n[commands]\nmeter-read-voltage = \"MEAS:VOLT?\"\nmeter-read-voltag = \"1\"\n", "bad.kpd:4: key 'meter-read-voltag': unknown key: did you mean 'meter-read-voltage'?"},
      {"roles = [\"meter\"]\nmeter-read-voltage = \"MEAS:VOLT?\"\n", "bad.kpd:2: key 'meter-read-voltage': a command belongs under [commands]"},
      {"roles = [\"meter\"]\nidentty = \"*\"\n", "unknown key: did you mean 'identity'?"},
      {"roles = [\"load\"]\n[commands]\ncc-level = \"CURR\"\n", "bad.kpd:3: key 'cc-level': 'CURR' needs {} where the number goes"},
      {"roles = [\"load\"]\n[commands]\ninput-on = \"INP {}\"\n", "bad.kpd:3: key 'input-on': 'INP {}' takes no number"},
      {"roles = [\"load\"]\n[commands]\ncc-select = \"FUNC CURR\"\n", "bad.kpd:1: role 'load' needs key 'cc-level'"},
      {"roles = [\"meter\"]\n[commands]\nmeter-read-voltage = \"\"\n", "bad.kpd:3: key 'meter-read-voltage': empty value"},
      {"roles = [\"meter\"]\n[commands]\nmeter-read-voltage = 5\n", "must be the SCPI text in quotes"},
      {"format = \"kneepoint-dialect 9\"\nroles = [\"meter\"]\n", "bad.kpd:1: key 'format'"},
      {"# nothing\n", "bad.kpd:1: no 'roles' key"},
      // The older `key = text` format gets one message that says what changed.
      {"roles = load\ncc-select = FUNC CURR\n", "older 'key = text' format; dialects are TOML files now (.kpd)"},
  };
  for (const Case& c : cases) {
    auto p = ParseProfile(c.text, "bad.kpd");
    ASSERT_FALSE(p.ok()) << c.text;
    EXPECT_NE(p.status().message().find(c.says), std::string::npos) << p.status().message();
  }
}

TEST(Profile, FindByNameInRigFolderFirst) {
  testing::TempDir dir;
  std::filesystem::create_directories(dir.path() / "profiles");
  std::ofstream(dir.File("profiles/my-meter.kpd")) << "roles = [\"meter\"]\n[commands]\nmeter-read-voltage = \"READ?\"\n";
  auto f = FindProfile("my-meter", dir.path().string());
  ASSERT_TRUE(f.ok()) << f.status().ToString();
  EXPECT_EQ(LoadProfileFile(*f)->meter.measure_voltage, "READ?");
  auto missing = FindProfile("no-such-thing", dir.path().string());
  ASSERT_FALSE(missing.ok());
  EXPECT_NE(missing.status().message().find("no-such-thing.kpd"), std::string::npos);
  EXPECT_FALSE(FindProfile("./nope.kpd", dir.path().string()).ok());
}

}  // namespace
}  // namespace kp
