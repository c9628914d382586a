// Dialect behaviour over a real link (the simulator server on loopback TCP,
// sharing the run's VirtualClock): the init list before anything else, the
// teardown list when the rig closes with the load still off at the end, the
// error queue read after every setting so that a setpoint the instrument
// refuses stops the run with the load off, and the pause after a mode change.
#include <filesystem>
#include <fstream>
#include <iterator>

#include <fmt/format.h>
#include <gtest/gtest.h>

#include "drivers/sim/sim_bench.h"
#include "drivers/sim/sim_server.h"
#include "rig/guardian.h"
#include "rig/rig.h"
#include "rig/rig_file.h"
#include "rig/run_controller.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

struct Served {
  VirtualClock clock;
  sim::SimBench bench{sim::DemoLiIonCell(2.56), clock};
  std::unique_ptr<sim::SimServer> server;
  testing::TempDir dir;
  explicit Served(sim::FaultOptions load_faults = {}) {
    // The faults apply to every served instrument; only the load gets settings here.
    auto s = sim::SimServer::Start(*ParseAddress("tcp:127.0.0.1:0"),
                                   {{"load", &bench.load()}, {"thermometer", &bench.thermometer()}}, load_faults);
    EXPECT_TRUE(s.ok()) << s.status().ToString();
    server = std::move(*s);
  }
  std::string RigFile(const std::string& load_profile) {
    std::string text = fmt::format(
        "[bench]\nname = \"dialect\"\nclock_speed = 1.0\ntrace = \"{}\"\nmax_current_a = 5.0\n"
        "\n[[instrument]]\nname = \"load\"\naddress = \"{}\"\nprofile = \"{}\"\nroles = [\"load\"]\n"
        "timeout_s = 0.5\nretries = 1\nconfirm_writes = true\n"
        "\n[[instrument]]\nname = \"probe\"\naddress = \"{}\"\nprofile = \"kneepoint-sim\"\nroles = [\"thermometer\"]\n"
        "timeout_s = 0.5\n",
        dir.File("trace.log"), server->client_addresses()[0], load_profile, server->client_addresses()[1]);
    std::string path = dir.File("bench.toml");
    std::ofstream(path) << text;
    return path;
  }
  std::string Trace() {
    std::ifstream in(dir.File("trace.log"));
    return std::string(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
  }
};

// Where `needle` first occurs in the trace after `from` (npos when not).
size_t Find(const std::string& trace, const std::string& needle, size_t from = 0) { return trace.find(needle, from); }

TEST(DialectBehaviour, InitFirstErrorsCheckedAfterSettingsTeardownLast) {
  Served s;
  std::string rig_path = s.RigFile("kneepoint-sim-checked");
  Plan plan = testing::CompileForCell2500("discharge 500mA until time>=30s every=10s\ndischarge 1W until time>=30s every=10s\n");
  RunResult result;
  std::vector<std::string> notes;
  {
    RigOpenOptions ro;
    ro.clock = &s.clock;
    ro.note = [&](std::string_view m) { notes.emplace_back(m); };
    auto rig = OpenRig(rig_path, ro);
    ASSERT_TRUE(rig.ok()) << rig.status().ToString();
    EXPECT_TRUE(s.bench.load_remote()) << "init took remote control";
    testing::StoreFixture f;
    RunController rc(*f.store, s.clock, (*rig)->roles());
    auto r = rc.Execute(plan, {});
    ASSERT_TRUE(r.ok()) << r.status().ToString();
    result = *r;
    EXPECT_FALSE(s.bench.load_input_on());
  }
  EXPECT_EQ(result.outcome, Outcome::kCompleted) << result.reason;
  EXPECT_FALSE(s.bench.load_remote()) << "teardown gave control back";
  EXPECT_FALSE(s.bench.load_input_on());
  std::string trace = s.Trace();
  size_t idn = Find(trace, ">  *IDN?");
  size_t init = Find(trace, ">  SYST:REM");
  size_t first_off = Find(trace, ">  INP OFF");
  ASSERT_NE(idn, std::string::npos) << trace;
  ASSERT_NE(init, std::string::npos) << trace;
  EXPECT_LT(idn, init);
  EXPECT_LT(init, first_off) << "init before the first setting";
  // Every setting is followed by the error query before the next command.
  size_t level = Find(trace, ">  CURR +5");
  ASSERT_NE(level, std::string::npos) << trace;
  size_t after = trace.find(">  ", level + 3);
  size_t opc = Find(trace, ">  *OPC?", level);
  size_t err = Find(trace, ">  SYST:ERR?", level);
  ASSERT_NE(err, std::string::npos);
  EXPECT_TRUE(after == opc || after == err) << trace.substr(level, 200);
  EXPECT_LT(err, trace.find(">  INP ON", level));
  // Teardown: off first, then SYST:LOC, then the state read back.
  size_t loc = trace.rfind(">  SYST:LOC");
  ASSERT_NE(loc, std::string::npos) << trace;
  EXPECT_LT(trace.rfind(">  INP OFF", loc), loc);
  EXPECT_NE(trace.find(">  INP?", loc), std::string::npos) << "the input is read back after the teardown";
}

TEST(DialectBehaviour, ModeChangesWaitTheSettleTime) {
  Served s;
  std::string rig_path = s.RigFile("kneepoint-sim-checked");
  RigOpenOptions ro;
  ro.clock = &s.clock;
  ro.note = [](std::string_view) {};
  auto rig = OpenRig(rig_path, ro);
  ASSERT_TRUE(rig.ok()) << rig.status().ToString();
  LoadDriver& load = *(*rig)->roles().load;
  Seconds t0 = s.clock.Now();
  ASSERT_OK(load.SetLevel(LoadMode::kPower, 1.0));
  EXPECT_NEAR((s.clock.Now() - t0).count(), 0.05, 1e-9) << "mode-settle-s = 0.05 in the dialect";
  t0 = s.clock.Now();
  ASSERT_OK(load.SetLevel(LoadMode::kPower, 1.5));
  EXPECT_EQ((s.clock.Now() - t0).count(), 0.0) << "no mode change, no wait";
}

TEST(DialectBehaviour, ARefusedSettingStopsTheRunWithTheLoadOff) {
  // Load settings in order: CURR:PROT 5 (the rig's max current, at open);
  // at the run's start the protections from the procedure: VOLT:PROT:LOW,
  // CURR:PROT, POW:PROT; then the setpoint CURR 0.5. A refused protection
  // keeps the run from starting, a refused setpoint aborts it at once.
  struct Case {
    int refuse_at;
    const char* says;
  } cases[] = {{2, "refused 'VOLT:PROT:LOW +2.40000E+00': -222,\"Data out of range\""},
               {5, "refused 'CURR +5.00000E-01': -222,\"Data out of range\""}};
  for (const Case& c : cases) {
    SCOPED_TRACE(c.refuse_at);
    sim::FaultOptions faults;
    faults.refuse_setting_at = c.refuse_at;
    Served s(faults);
    std::string rig_path = s.RigFile("kneepoint-sim-checked");
    Plan plan = testing::CompileForCell2500("discharge 500mA until time>=10min every=10s\n");
    RigOpenOptions ro;
    ro.clock = &s.clock;
    ro.note = [](std::string_view) {};
    auto rig = OpenRig(rig_path, ro);
    ASSERT_TRUE(rig.ok()) << rig.status().ToString();
    testing::StoreFixture f;
    RunController rc(*f.store, s.clock, (*rig)->roles());
    auto r = rc.Execute(plan, {});
    ASSERT_TRUE(r.ok()) << r.status().ToString();
    EXPECT_EQ(r->outcome, Outcome::kAborted);
    EXPECT_NE(r->reason.find(c.says), std::string::npos) << r->reason;
    EXPECT_FALSE(s.bench.load_input_on());
    EXPECT_LT(s.clock.Now().count(), 60.0) << "caught at the command, not minutes later";
  }
}

// The guardian switches loads off by itself when the runner dies: it refuses
// a load it cannot reach (VXI-11) with the fix, and looks a USB identity up
// before it forks (here: none present, so it says so).
TEST(DialectBehaviour, GuardianRefusesLoadsItCannotReachBeforeForking) {
  testing::TempDir dir;
  auto spec_for = [&](const std::string& address) {
    std::string text = fmt::format(
        "[bench]\nname = \"g\"\n\n[[instrument]]\nname = \"load\"\naddress = \"{}\"\nprofile = \"kneepoint-sim\"\n"
        "roles = [\"load\", \"thermometer\"]\n",
        address);
    std::string path = dir.File("g.toml");
    std::ofstream(path) << text;
    return LoadRigFile(path);
  };
  GuardianOptions go;
  go.db_path = dir.File("g.db");
  auto vxi = spec_for("TCPIP0::192.0.2.7::INSTR");
  ASSERT_TRUE(vxi.ok()) << vxi.status().ToString();
  auto g = Guardian::Start(*vxi, go);
  ASSERT_FALSE(g.ok());
  EXPECT_NE(g.status().message().find("cannot speak VXI-11; address it by its raw socket"), std::string::npos) << g.status().message();
  auto usb = spec_for("USB0::0x1AB1::0x0E11::KP-NO-SUCH-SERIAL::INSTR");
  ASSERT_TRUE(usb.ok()) << usb.status().ToString();
  auto h = Guardian::Start(*usb, go);
  ASSERT_FALSE(h.ok());
  EXPECT_NE(h.status().message().find("no usbtmc device is 1ab1:0e11 serial 'KP-NO-SUCH-SERIAL'"), std::string::npos)
      << h.status().message();
}

}  // namespace
}  // namespace kp
