#include "rig/rig_file.h"

#include <filesystem>
#include <fstream>

#include <gtest/gtest.h>

#include "drivers/data_dir.h"

#include "tests/support/test_support.h"

namespace kp {
namespace {

const char* kGood = R"(# a bench with three instruments
[bench]
name = "bench 2"
clock_speed = 1.0
max_current_a = 8.0
max_voltage_v = 4.4
load_rating_w = 60.0

[[instrument]]
name = "load"
address = "tcp:192.0.2.10:5025"
profile = "generic-scpi-load-4wire"
roles = ["load"]
remote_sense = true
unguarded = ["overpower", "watchdog"]
current_offset_a = -0.002
current_gain = 1.001

[[instrument]]
name = "dmm"
address = "serial:/dev/ttyUSB0?baud=115200&eol=crlf"
profile = "generic-scpi-dmm"
roles = ["meter"]
voltage_gain = 0.9995

[[instrument]]
name = "tc"
address = "tcp:192.0.2.11:5025"
profile = "generic-scpi-thermocouple"
roles = ["thermometer"]
channel = 103
temperature_offset_c = 0.4
)";

std::string Replace(std::string text, const std::string& from, const std::string& to) {
  size_t pos = text.find(from);
  EXPECT_NE(pos, std::string::npos) << from;
  if (pos != std::string::npos) text.replace(pos, from.size(), to);
  return text;
}

TEST(RigFile, ParsesEveryKey) {
  auto spec = ParseRigFile(kGood, "/tmp/bench.toml");
  ASSERT_TRUE(spec.ok()) << spec.status().ToString();
  EXPECT_EQ(spec->name, "bench 2");
  EXPECT_DOUBLE_EQ(spec->limits.max_current_a, 8.0);
  EXPECT_DOUBLE_EQ(spec->limits.load_rating_w, 60.0);
  ASSERT_EQ(spec->instruments.size(), 3u);
  const InstrumentSpec& load = spec->instruments[0];
  EXPECT_EQ(load.line, 9);
  EXPECT_TRUE(load.remote_sense);
  EXPECT_EQ(load.profile.load.remote_sense_on, "SYST:SENS ON");
  EXPECT_DOUBLE_EQ(load.current.Apply(1.0), 1.001 - 0.002);
  EXPECT_DOUBLE_EQ(spec->instruments[1].voltage.gain, 0.9995);
  EXPECT_EQ(spec->instruments[2].profile.thermometer.measure_temperature, "MEAS:TEMP? TC,K,(@103)");
  EXPECT_DOUBLE_EQ(spec->instruments[2].temperature.Apply(25.0), 25.4);
  EXPECT_DOUBLE_EQ(spec->instruments[2].temperature_tolerance_c, 0.5);  // the default
  auto tight = ParseRigFile(Replace(kGood, "temperature_offset_c = 0.4", "temperature_offset_c = 0.4\ntemperature_tolerance_c = 0.2"),
                            "/tmp/bench.toml");
  ASSERT_TRUE(tight.ok()) << tight.status().ToString();
  EXPECT_DOUBLE_EQ(tight->instruments[2].temperature_tolerance_c, 0.2);
}

// Keys named for their unit also take a quoted value with a unit, read by the
// same parser as procedures and options (1 A = 1000 mA, 1 s = 1000 ms).
TEST(RigFile, QuotedValuesTakeUnits) {
  std::string text = Replace(kGood, "max_current_a = 8.0", "max_current_a = \"8000 mA\"");
  text = Replace(text, "max_voltage_v = 4.4", "max_voltage_v = \"4400mV\"");
  text = Replace(text, "current_offset_a = -0.002", "current_offset_a = \"-2mA\"\ntimeout_s = \"1500ms\"");
  auto spec = ParseRigFile(text, "/tmp/bench.toml");
  ASSERT_TRUE(spec.ok()) << spec.status().ToString();
  EXPECT_DOUBLE_EQ(spec->limits.max_current_a, 8.0);
  EXPECT_DOUBLE_EQ(spec->limits.max_voltage_v, 4.4);
  EXPECT_DOUBLE_EQ(spec->instruments[0].timeout_s, 1.5);
  EXPECT_DOUBLE_EQ(spec->instruments[0].current.Apply(1.0), 1.001 - 0.002);
  auto bad = ParseRigFile(Replace(kGood, "max_voltage_v = 4.4", "max_voltage_v = \"4.4\""), "/tmp/bench.toml");
  ASSERT_FALSE(bad.ok());
  EXPECT_NE(bad.status().message().find("bench.toml:6: key 'bench.max_voltage_v': '4.4' has no unit: did you mean 4.4V?"),
            std::string::npos)
      << bad.status().message();
  auto wrong = ParseRigFile(Replace(kGood, "max_voltage_v = 4.4", "max_voltage_v = \"4.4A\""), "/tmp/bench.toml");
  ASSERT_FALSE(wrong.ok());
  EXPECT_NE(wrong.status().message().find("needs a voltage"), std::string::npos) << wrong.status().message();
}

TEST(RigFile, MalformedGivesFileLineAndKey) {
  struct Case {
    std::string text;
    const char* says;
  } cases[] = {
      {Replace(kGood, "clock_speed = 1.0", "clock_speed = \"fast\""), "bench.toml:4: key 'bench.clock_speed': must be a number"},
      {Replace(kGood, "max_current_a = 8.0", "max_curent_a = 8.0"), "bench.toml:5: key 'bench.max_curent_a': unknown key"},
      {Replace(kGood, "address = \"tcp:192.0.2.10:5025\"", "address = \"tcp:192.0.2.10\""),
       "bench.toml:11: key 'instrument[1].address': address 'tcp:192.0.2.10'"},
      {Replace(kGood, "address = \"tcp:192.0.2.10:5025\"\n", ""), "bench.toml:9: key 'instrument[1].address': missing"},
      {Replace(kGood, "roles = [\"meter\"]", "roles = [\"voltmeter\"]"), "bench.toml:23: key 'instrument[2].roles': each role must be"},
      {Replace(kGood, "roles = [\"meter\"]", "roles = [\"load\"]"), "bench.toml:23: key 'instrument[2].roles': role 'load' is already taken by 'load'"},
      {Replace(kGood, "profile = \"generic-scpi-dmm\"", "profile = \"generic-scpi-thermocouple\""),
       "bench.toml:23: key 'instrument[2].roles': profile 'generic-scpi-thermocouple' cannot act as meter"},
      {Replace(kGood, "profile = \"generic-scpi-dmm\"", "profile = \"no-such-profile\""),
       "bench.toml:22: key 'instrument[2].profile': no profile named 'no-such-profile'"},
      {Replace(kGood, "channel = 103", "channel = [1]"), "bench.toml:31: key 'instrument[3].channel': must be a number or a string"},
      {Replace(kGood, "remote_sense = true", "remote_sense = 1"), "bench.toml:14: key 'instrument[1].remote_sense': must be true or false"},
      {Replace(kGood, "voltage_gain = 0.9995", "voltage_gain = 9.995"), "bench.toml:24: key 'instrument[2].voltage_gain': 9.995 is outside"},
      {Replace(kGood, "temperature_offset_c = 0.4", "temperature_tolerance_c = -1"),
       "bench.toml:32: key 'instrument[3].temperature_tolerance_c': -1 is outside"},
      {Replace(kGood, "name = \"dmm\"", "name = \"load\""), "bench.toml:20: key 'instrument[2].name': 'load' is used twice"},
      {Replace(kGood, "roles = [\"thermometer\"]", "roles = [\"supply\"]"), "key 'instrument[3].roles': profile 'generic-scpi-thermocouple' cannot act as supply"},
      {Replace(kGood, "[bench]", "[bench"), "bench.toml:2:"},
      {"[bench]\nname = \"x\"\n", "bench.toml:1: key 'instrument': no [[instrument]] tables"},
      {Replace(kGood, "unguarded = [\"overpower\", \"watchdog\"]\n", ""),
       "bench.toml:9: key 'instrument[1].unguarded': profile 'generic-scpi-load-4wire' has no overpower protection (guard-overpower = none)"},
      {Replace(kGood, "unguarded = [\"overpower\", \"watchdog\"]", "unguarded = [\"overpower\"]"),
       "bench.toml:9: key 'instrument[1].unguarded': profile 'generic-scpi-load-4wire' has no watchdog protection"},
      {Replace(kGood, "unguarded = [\"overpower\", \"watchdog\"]", "unguarded = [\"overpower\", \"watchdog\", \"overcurrent\"]"),
       "bench.toml:15: key 'instrument[1].unguarded': profile 'generic-scpi-load-4wire' has the overcurrent protection (guard-overcurrent); remove it"},
      {Replace(kGood, "unguarded = [\"overpower\", \"watchdog\"]", "unguarded = [\"fuse\"]"),
       "bench.toml:15: key 'instrument[1].unguarded': each entry must be"},
      {Replace(kGood, "voltage_gain = 0.9995", "voltage_gain = 0.9995\nunguarded = []"),
       "bench.toml:25: key 'instrument[2].unguarded': only a load has protections to acknowledge"},
      {Replace(kGood, "address = \"tcp:192.0.2.11:5025\"", "address = \"pty\""), "bench.toml:28: key 'instrument[3].address': 'pty' is for `kneepoint sim`"},
  };
  for (const Case& c : cases) {
    auto spec = ParseRigFile(c.text, "/tmp/bench.toml");
    ASSERT_FALSE(spec.ok()) << c.says;
    EXPECT_EQ(spec.status().code(), StatusCode::kInvalidInput);
    EXPECT_NE(spec.status().message().find(c.says), std::string::npos) << spec.status().message();
  }
}

TEST(RigFile, MalformedProfileNamesBothFiles) {
  testing::TempDir dir;
  std::filesystem::create_directories(dir.path() / "profiles");
  std::ofstream(dir.File("profiles/odd-meter.kpd")) << "roles = [\"meter\"]\n[commands]\nmeter-read-voltage = \"READ\"\n";
  std::string text = Replace(kGood, "profile = \"generic-scpi-dmm\"", "profile = \"odd-meter\"");
  std::ofstream(dir.File("bench.toml")) << text;
  auto spec = LoadRigFile(dir.File("bench.toml"));
  ASSERT_FALSE(spec.ok());
  const std::string m = spec.status().message();
  EXPECT_NE(m.find("bench.toml:22: key 'instrument[2].profile'"), std::string::npos) << m;
  EXPECT_NE(m.find("odd-meter.kpd:3: key 'meter-read-voltage'"), std::string::npos) << m;
}

TEST(RigFile, ShippedExamplesParse) {
  // The shipped dialects are found beside the program (the build tree's
  // share/kneepoint), and so are the example rig files that name them.
  auto shipped = FindProfile("generic-scpi-dmm", "/nonexistent");
  ASSERT_TRUE(shipped.ok()) << shipped.status().ToString();
  std::optional<std::filesystem::path> rigs = DataSubdir("rigs");
  ASSERT_TRUE(rigs.has_value());
  for (const char* name : {"sim-tcp.toml", "bench-generic.toml"}) {
    std::string path = (*rigs / name).string();
    auto spec = LoadRigFile(path);
    EXPECT_TRUE(spec.ok()) << path << ": " << spec.status().ToString();
  }
}

TEST(RigFile, UnknownRigSpecIsRefused) {
  RigOpenOptions o;
  auto r = OpenRig("bench.ini", o);
  ASSERT_FALSE(r.ok());
  EXPECT_EQ(r.status().code(), StatusCode::kInvalidInput);
  auto missing = OpenRig("/nonexistent/bench.toml", o);
  ASSERT_FALSE(missing.ok());
  EXPECT_EQ(missing.status().code(), StatusCode::kNotFound);
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

// A rig file's profile path cannot reach files outside the profile search
// path, and the error names the path, never what the file holds.
TEST(RigFileProfilePath, PathsOutsideTheSearchPathAreRefusedWithoutEchoingThem) {
  testing::TempDir dir;
  std::filesystem::create_directories(dir.File("rigs"));
  std::ofstream(dir.File("secret.txt")) << "TOP-SECRET first line\n";
  std::ofstream(dir.File("outside.kpd")) << "TOP-SECRET profile line\n";
  for (const std::string& ref : {dir.File("secret.txt"), std::string("../secret.txt"), std::string("../outside.kpd"),
                                 std::string("/etc/passwd")}) {
    std::string text = Replace(kGood, "profile = \"generic-scpi-dmm\"", "profile = \"" + ref + "\"");
    auto spec = ParseRigFile(text, dir.File("rigs/bench.toml"));
    ASSERT_FALSE(spec.ok()) << ref;
    EXPECT_EQ(spec.status().message().find("TOP-SECRET"), std::string::npos) << spec.status().message();
    EXPECT_EQ(spec.status().message().find("root:"), std::string::npos) << spec.status().message();
    EXPECT_NE(spec.status().message().find("profile"), std::string::npos) << spec.status().message();
  }
  // A profile in the rig file's own folder is found.
  std::filesystem::copy_file(testing::SourcePath("drivers/profiles/generic-scpi-dmm.kpd"), dir.File("rigs/my-dmm.kpd"));
  std::string text = Replace(kGood, "profile = \"generic-scpi-dmm\"", "profile = \"my-dmm.kpd\"");
  auto spec = ParseRigFile(text, dir.File("rigs/bench.toml"));
  EXPECT_TRUE(spec.ok()) << spec.status().ToString();
}

// The calibration date goes with each run's equipment record; the file's
// text is kept as read.
TEST(RigFile, CalibrationDateAndTheTextAreKept) {
  std::string text = Replace(kGood, "current_gain = 1.001\n", "current_gain = 1.001\ncalibrated_on = 2026-02-14\n");
  text = Replace(text, "voltage_gain = 0.9995\n", "voltage_gain = 0.9995\ncalibrated_on = \"2025-11-30\"\n");
  auto spec = ParseRigFile(text, "/tmp/bench.toml");
  ASSERT_TRUE(spec.ok()) << spec.status().ToString();
  EXPECT_EQ(spec->text, text);
  EXPECT_EQ(spec->instruments[0].calibrated_on, "2026-02-14");
  EXPECT_EQ(spec->instruments[1].calibrated_on, "2025-11-30");
  EXPECT_EQ(spec->instruments[2].calibrated_on, "");
  for (const char* bad : {"calibrated_on = \"14.02.2026\"\n", "calibrated_on = 20260214\n", "calibrated_on = \"2026-2-14\"\n"}) {
    auto r = ParseRigFile(Replace(kGood, "current_gain = 1.001\n", std::string("current_gain = 1.001\n") + bad), "/tmp/bench.toml");
    ASSERT_FALSE(r.ok()) << bad;
    EXPECT_NE(r.status().message().find("instrument[1].calibrated_on"), std::string::npos) << r.status().message();
  }
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

// A chamber is one more role; its set-point range is a [bench] limit.
TEST(RigFile, ChamberRoleAndItsLimits) {
  std::string text = Replace(kGood, "load_rating_w = 60.0\n", "load_rating_w = 60.0\nchamber_min_c = -20.0\nchamber_max_c = \"60degC\"\n");
  text += "\n[[instrument]]\nname = \"climate\"\naddress = \"tcp:192.0.2.12:5025\"\nprofile = \"kneepoint-sim-chamber\"\n"
          "roles = [\"chamber\"]\n";
  auto spec = ParseRigFile(text, "/tmp/bench.toml");
  ASSERT_TRUE(spec.ok()) << spec.status().ToString();
  EXPECT_EQ(spec->limits.chamber_min_c, -20.0);
  EXPECT_EQ(spec->limits.chamber_max_c, 60.0);
  ASSERT_EQ(spec->instruments.size(), 4u);
  EXPECT_EQ(spec->instruments.back().roles, std::vector<std::string>{"chamber"});

  auto crossed = ParseRigFile(Replace(kGood, "load_rating_w = 60.0\n", "load_rating_w = 60.0\nchamber_min_c = 50\nchamber_max_c = 40\n"),
                              "/tmp/bench.toml");
  ASSERT_FALSE(crossed.ok());
  EXPECT_NE(crossed.status().message().find("bench.chamber_max_c"), std::string::npos) << crossed.status().ToString();
  EXPECT_NE(crossed.status().message().find("must be above chamber_min_c"), std::string::npos) << crossed.status().ToString();
}

}  // namespace
}  // namespace kp
