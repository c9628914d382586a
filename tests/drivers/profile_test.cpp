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
    if (e.path().extension() != ".kpp") continue;
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
  auto p = ParseProfile("roles = thermometer\nidentity = *,TEMP-LOGGER*\nread-temperature = MEAS:TEMP? TC,K,(@{ch})\n", "t.kpp");
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
      {"roles = load\ncc-select FUNC CURR\n", "bad.kpp:2: expected 'key = value'"},
      {"identity = *\nroles = meter\n", "bad.kpp:1: key 'identity': the first key must be 'roles'"},
      {"roles = load, oven\n", "bad.kpp:1: key 'roles': unknown role 'oven'"},
      {"roles = meter\n\n# c\nmeter-read-voltage = MEAS:VOLT?\nmeter-read-voltage = READ?\n", "bad.kpp:5: key 'meter-read-voltage': repeated (first set on line 4)"},
      {"roles = meter\nmeter-read-voltage = MEAS:VOLT\n", "bad.kpp:2: key 'meter-read-voltage': 'MEAS:VOLT' is a reading and must be a query"},
      {"roles = meter\nmeter-read-voltage = MEAS:VOLT?\nread-temperature = MEAS:TEMP?\n", "bad.kpp:3: key 'read-temperature': belongs to role 'thermometer'"},
      {"roles = meter\nmeter-read-voltage = MEAS:VOLT?\nbogus-key = 1\n", "bad.kpp:3: key 'bogus-key': unknown key"},
      {"roles = load\ncc-level = CURR\n", "bad.kpp:2: key 'cc-level': 'CURR' needs {} where the number goes"},
      {"roles = load\ninput-on = INP {}\n", "bad.kpp:2: key 'input-on': 'INP {}' takes no number"},
      {"roles = load\ncc-select = FUNC CURR\n", "bad.kpp:1: role 'load' needs key 'cc-level'"},
      {"roles = meter\nmeter-read-voltage =\n", "bad.kpp:2: key 'meter-read-voltage': empty value"},
      {"# nothing\n", "bad.kpp:1: no 'roles' key"},
  };
  for (const Case& c : cases) {
    auto p = ParseProfile(c.text, "bad.kpp");
    ASSERT_FALSE(p.ok()) << c.text;
    EXPECT_NE(p.status().message().find(c.says), std::string::npos) << p.status().message();
  }
}

TEST(Profile, FindByNameInRigFolderFirst) {
  testing::TempDir dir;
  std::filesystem::create_directories(dir.path() / "profiles");
  std::ofstream(dir.File("profiles/my-meter.kpp")) << "roles = meter\nmeter-read-voltage = READ?\n";
  auto f = FindProfile("my-meter", dir.path().string());
  ASSERT_TRUE(f.ok()) << f.status().ToString();
  EXPECT_EQ(LoadProfileFile(*f)->meter.measure_voltage, "READ?");
  auto missing = FindProfile("no-such-thing", dir.path().string());
  ASSERT_FALSE(missing.ok());
  EXPECT_NE(missing.status().message().find("no-such-thing.kpp"), std::string::npos);
  EXPECT_FALSE(FindProfile("./nope.kpp", dir.path().string()).ok());
}

}  // namespace
}  // namespace kp
