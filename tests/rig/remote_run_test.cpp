// Whole runs over real links: the rig file points at the simulator server on
// loopback TCP or on pseudo-terminals. The server's bench and the run share
// one VirtualClock (only the run advances it) and every command is confirmed
// with *OPC? (confirm_writes), so each reading is taken at the same simulated
// instant as in the in-process run: the bytes cross real sockets, the physics
// stays deterministic.
#include <filesystem>
#include <fstream>
#include <iterator>

#include <fmt/format.h>
#include <gtest/gtest.h>

#include "rig/device_identity.h"

#include "analysis/metrics.h"
#include "drivers/sim/sim_bench.h"
#include "drivers/sim/sim_server.h"
#include "rig/rig.h"
#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

using testing::Cell2500;

// One sample every 10 s keeps a full 0.2C discharge (about 1,850 samples) quick over sockets.
Plan TestPlan() { return RatedCapacityPlan(Cell2500(), 10.0); }

struct Outcomes {
  RunResult result;
  RunRow row;
  std::vector<Sample> samples;
  double mah = 0.0;
  bool load_on_after = true;
  std::string trace;
};

Outcomes RunInProcess(const sim::SimOptions& so = {}) {
  testing::TempDir dir;
  SteadyClock wall;
  VirtualClock clock;
  auto store = Store::Open(dir.File("run.db"), wall);
  EXPECT_TRUE(store.ok());
  SimRig rig(clock, sim::DemoLiIonCell(2.56), so);
  RunController rc(**store, clock, rig.roles());
  auto r = rc.Execute(TestPlan(), {});
  EXPECT_TRUE(r.ok());
  Outcomes o;
  o.result = *r;
  o.row = *(*store)->GetRun(r->run_id);
  o.samples = *(*store)->LoadSamples(r->run_id);
  o.mah = DeliveredChargeMah(o.samples);
  o.load_on_after = rig.bench().load_input_on();
  return o;
}

using Profiles = std::vector<std::string>;
const Profiles kSimProfiles = {"kneepoint-sim", "kneepoint-sim", "kneepoint-sim"};

std::string RigText(const std::vector<std::string>& addr, const std::string& extra = "", const Profiles& profiles = kSimProfiles) {
  const char* roles[] = {"load", "meter", "thermometer"};
  std::string text =
      "[bench]\nname = \"sim over links\"\nclock_speed = 1.0\ntrace = \"trace.log\"\n"
      "max_current_a = 5.0\nmax_voltage_v = 4.3\nload_rating_w = 50.0\n";
  for (size_t i = 0; i < 3; ++i) {
    text += fmt::format(
        "\n[[instrument]]\nname = \"{}\"\naddress = \"{}\"\nprofile = \"{}\"\nroles = [\"{}\"]\n"
        "timeout_s = 0.3\nretries = 2\nconfirm_writes = true\nchannel = 101\n{}{}",
        roles[i], addr[i], profiles[i], roles[i], extra,
        // The generic load profile lacks these protections: the rig file says so.
        i == 0 && profiles[i] == "generic-scpi-load" ? "unguarded = [\"overcurrent\", \"overpower\", \"watchdog\"]\n" : "");
  }
  return text;
}

Outcomes RunOverLink(const char* listen, const sim::FaultOptions& faults = {}, const sim::SimOptions& so = {},
                     const std::string& meter_extra = "", const Profiles& profiles = kSimProfiles) {
  testing::TempDir dir;
  SteadyClock wall;
  VirtualClock clock;
  sim::SimBench bench(sim::DemoLiIonCell(2.56), clock, so);
  auto listen_addr = ParseAddress(listen);
  EXPECT_TRUE(listen_addr.ok());
  auto server = sim::SimServer::Start(*listen_addr, {{"load", &bench.load()}, {"meter", &bench.meter()}, {"thermometer", &bench.thermometer()}},
                                      faults);
  EXPECT_TRUE(server.ok()) << server.status().ToString();
  std::string rig_path = dir.File("bench.toml");
  std::ofstream(rig_path) << RigText((*server)->client_addresses(), meter_extra, profiles);
  Outcomes o;
  {
    RigOpenOptions ro;
    ro.clock = &clock;
    ro.note = [](std::string_view) {};
    auto rig = OpenRig(rig_path, ro);
    EXPECT_TRUE(rig.ok()) << rig.status().ToString();
    if (!rig.ok()) return o;
    EXPECT_EQ(&(*rig)->clock(), &clock);
    auto store = Store::Open(dir.File("run.db"), wall);
    EXPECT_TRUE(store.ok());
    RunController rc(**store, (*rig)->clock(), (*rig)->roles());
    auto r = rc.Execute(TestPlan(), {});
    EXPECT_TRUE(r.ok()) << r.status().ToString();
    if (!r.ok()) return o;
    o.result = *r;
    o.row = *(*store)->GetRun(r->run_id);
    o.samples = *(*store)->LoadSamples(r->run_id);
    o.mah = DeliveredChargeMah(o.samples);
  }
  (*server)->Stop();
  o.load_on_after = bench.load_input_on();
  std::ifstream in(dir.File("trace.log"));
  o.trace.assign(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
  return o;
}

// No sample went missing: after the open-circuit reading at t = 0 and the one
// just after the load switches on, one every 10 s; the last is the reading
// that reached the cutoff, taken between logs by the limit checks.
void ExpectNoGaps(const std::vector<Sample>& s) {
  ASSERT_GE(s.size(), 3u);
  EXPECT_EQ(s[0].t_s, 0.0);
  EXPECT_LT(s[1].t_s, 1.0);
  for (size_t i = 2; i + 1 < s.size(); ++i) ASSERT_NEAR(s[i].t_s - s[i - 1].t_s, 10.0, 1e-6) << "gap before sample " << i;
  EXPECT_LE(s.back().t_s - s[s.size() - 2].t_s, 10.0 + 1e-6);
}

TEST(RemoteRun, TcpAndPtyStoreTheSameChargeAsInProcess) {
  Outcomes local = RunInProcess();
  ASSERT_EQ(local.result.outcome, Outcome::kCompleted) << local.result.reason;
  // 0.2C from a 2.56 Ah cell: a little over 2,500 mAh to 2.75 V.
  EXPECT_GT(local.mah, 2500.0);
  for (const char* listen : {"tcp:127.0.0.1:0", "pty"}) {
    SCOPED_TRACE(listen);
    Outcomes remote = RunOverLink(listen);
    EXPECT_EQ(remote.result.outcome, Outcome::kCompleted) << remote.result.reason;
    EXPECT_FALSE(remote.load_on_after);
    ExpectNoGaps(remote.samples);
    // Logged every 10 s, yet the limit checks between logs end the discharge
    // within 10 mV of the cutoff.
    EXPECT_LE(remote.samples.back().voltage_v, Cell2500().cutoff_v);
    EXPECT_GT(remote.samples.back().voltage_v, Cell2500().cutoff_v - 0.010);
    // Required: within 0.5 %. With the shared clock and confirmed writes the
    // exchanges happen at the same simulated instants, so the samples match
    // exactly; a difference would mean a command took effect late.
    EXPECT_NEAR(remote.mah, local.mah, 0.005 * local.mah);
    EXPECT_EQ(remote.samples.size(), local.samples.size());
    EXPECT_DOUBLE_EQ(remote.mah, local.mah);
    EXPECT_NE(remote.row.rig.find("bench.toml"), std::string::npos);
    EXPECT_EQ(remote.trace.find("retry"), std::string::npos);  // a clean link needs none
    EXPECT_NE(remote.trace.find(">  INP ON"), std::string::npos);
  }
}

// The shipped generic profiles speak a dialect the simulator understands, so
// a rig file written for generic instruments can be tried on `kneepoint sim`.
TEST(RemoteRun, GenericProfilesDriveTheSimulator) {
  Outcomes local = RunInProcess();
  Outcomes remote = RunOverLink("tcp:127.0.0.1:0", {}, {}, "", {"generic-scpi-load", "generic-scpi-dmm", "generic-scpi-thermocouple"});
  EXPECT_EQ(remote.result.outcome, Outcome::kCompleted) << remote.result.reason;
  EXPECT_FALSE(remote.load_on_after);
  EXPECT_DOUBLE_EQ(remote.mah, local.mah);
  EXPECT_NE(remote.trace.find("MEAS:TEMP? TC,K,(@101)"), std::string::npos);
}

struct FaultCase {
  const char* name;
  sim::FaultOptions faults;
  sim::SimOptions sim;
  std::string extra;  // rig-file keys added to every instrument
  bool completes;
  const char* evidence;  // in the trace for completed runs, in the stored reason for aborts
};

std::vector<FaultCase> FaultCases() {
  std::vector<FaultCase> v;
  sim::FaultOptions f;
  f.drop_every = 1500;
  v.push_back({"drop", f, {}, "", true, "retry 1 of"});
  f = {};
  f.corrupt_every = 700;
  v.push_back({"corrupt", f, {}, "", true, "trailing text in numeric reply"});
  f = {};
  f.delay_every = 300;
  f.delay_s = 0.02;  // shorter than the 0.3 s timeout: only slower
  v.push_back({"delay", f, {}, "", true, ""});
  f = {};
  f.delay_every = 1500;
  f.delay_s = 0.45;  // longer than the 0.3 s timeout: the late reply must not pair with the retry
  v.push_back({"late reply", f, {}, "late_reply_s = 1.5\n", true, "discarded late reply"});
  f = {};
  f.disconnect_at = 400;
  v.push_back({"disconnect", f, {}, "", true, "link closed"});
  f = {};
  f.error_every = 1000;
  v.push_back({"scpi-error", f, {}, "", false, "-230,\"Data corrupt or stale\""});
  f = {};
  f.stick_at = 500;
  v.push_back({"stuck", f, {}, "stuck_after = 30\n", false, "looks stuck"});
  sim::SimOptions runaway;
  runaway.runaway_start_s = 3600;
  v.push_back({"runaway", {}, runaway, "", false, "over-temperature"});
  return v;
}

TEST(RemoteRun, EveryInjectedFaultEndsCleanly) {
  Outcomes clean = RunInProcess();
  for (const FaultCase& c : FaultCases()) {
    SCOPED_TRACE(c.name);
    Outcomes o = RunOverLink("tcp:127.0.0.1:0", c.faults, c.sim, c.extra);
    EXPECT_FALSE(o.load_on_after) << "the simulated load must be off";
    EXPECT_EQ(o.row.outcome, o.result.outcome);
    ExpectNoGaps(o.samples);
    EXPECT_EQ(static_cast<size_t>(o.row.sample_count), o.samples.size());
    if (c.completes) {
      EXPECT_EQ(o.result.outcome, Outcome::kCompleted) << o.result.reason;
      EXPECT_EQ(o.samples.size(), clean.samples.size());
      EXPECT_NEAR(o.mah, clean.mah, 0.005 * clean.mah);
      if (*c.evidence) {
        EXPECT_NE(o.trace.find(c.evidence), std::string::npos) << "trace lacks '" << c.evidence << "'";
      }
    } else {
      EXPECT_EQ(o.result.outcome, Outcome::kAborted);
      EXPECT_NE(o.row.reason.find(c.evidence), std::string::npos) << o.row.reason;
      EXPECT_LT(o.samples.size(), clean.samples.size());
    }
  }
}

}  // namespace
}  // namespace kp

namespace kp {
namespace {

struct ServedRig {
  testing::TempDir dir;
  VirtualClock clock;
  sim::SimBench bench{sim::DemoLiIonCell(2.56), clock};
  std::unique_ptr<sim::SimServer> server;
  ServedRig() {
    auto s = sim::SimServer::Start(*ParseAddress("tcp:127.0.0.1:0"),
                                   {{"load", &bench.load()}, {"meter", &bench.meter()}, {"thermometer", &bench.thermometer()}});
    EXPECT_TRUE(s.ok());
    server = std::move(*s);
  }
  Result<std::unique_ptr<Rig>> Open(const std::string& bench_keys, const std::string& meter_keys, const std::string& thermo_keys) {
    const auto& a = server->client_addresses();
    std::string text = "[bench]\n" + bench_keys;
    const char* roles[] = {"load", "meter", "thermometer"};
    const std::string* extra[] = {nullptr, &meter_keys, &thermo_keys};
    for (int i = 0; i < 3; ++i)
      text += fmt::format("\n[[instrument]]\nname = \"{}\"\naddress = \"{}\"\nprofile = \"kneepoint-sim\"\nroles = [\"{}\"]\n{}", roles[i], a[i],
                          roles[i], extra[i] ? *extra[i] : "");
    std::ofstream(dir.File("cal.toml")) << text;
    RigOpenOptions o;
    o.clock = &clock;
    o.note = [](std::string_view) {};
    return OpenRig(dir.File("cal.toml"), o);
  }
};

TEST(FileRig, AppliesCalibrationAndRigLimits) {
  ServedRig s;
  auto rig = s.Open("max_current_a = 2.0\nload_rating_w = 5.0\n", "voltage_gain = 1.01\nvoltage_offset_v = 0.005\n",
                    "temperature_offset_c = 0.5\n");
  ASSERT_TRUE(rig.ok()) << rig.status().ToString();
  RigRoles roles = (*rig)->roles();
  auto raw_v = roles.load->MeasureVoltage();  // the load's own reading, uncalibrated
  auto cal_v = roles.meter->MeasureVoltage();
  ASSERT_TRUE(raw_v.ok() && cal_v.ok());
  EXPECT_NEAR(*cal_v, *raw_v * 1.01 + 0.005, 1e-5);  // NR3 carries 6 significant digits
  EXPECT_NEAR(*roles.thermometer->MeasureTemperature(), sim::DemoLiIonCell().ambient_c + 0.5, 1e-4);
  EXPECT_DOUBLE_EQ((*rig)->limits().max_current_a, 2.0);
  Status over = roles.load->SetLevel(LoadMode::kCurrent, 2.5);
  EXPECT_EQ(over.code(), StatusCode::kLimitExceeded) << over.ToString();
  EXPECT_EQ(roles.load->SetLevel(LoadMode::kPower, 6.0).code(), StatusCode::kLimitExceeded);
  EXPECT_TRUE(roles.load->SetLevel(LoadMode::kCurrent, 1.5).ok());
  EXPECT_FALSE(s.bench.load_input_on());  // opening a rig never switches the load on
  // The lock is keyed by the device, not the spelling of its address.
  auto load_addr = ParseAddress(s.server->client_addresses()[0]);
  ASSERT_TRUE(load_addr.ok());
  EXPECT_NE((*rig)->LockKey().find(DeviceIdentity(*load_addr)), std::string::npos) << (*rig)->LockKey();
  // The equipment record every run on this rig stores: *IDN? as each
  // instrument answered it, profile, address, calibration; the file's text.
  ASSERT_EQ(roles.instruments.size(), 3u);
  const InstrumentRecord& meter = roles.instruments[1];
  EXPECT_EQ(meter.name, "meter");
  EXPECT_EQ(meter.roles, "meter");
  EXPECT_EQ(meter.model, "KP-SIM-METER");
  EXPECT_EQ(meter.serial, "SN0002");
  EXPECT_EQ(meter.identity, "Kneepoint Simulation,KP-SIM-METER,SN0002,1.0");
  EXPECT_EQ(meter.address, s.server->client_addresses()[1]);
  EXPECT_EQ(meter.profile, "kneepoint-sim");
  EXPECT_DOUBLE_EQ(meter.voltage_gain, 1.01);
  EXPECT_DOUBLE_EQ(meter.voltage_offset_v, 0.005);
  EXPECT_DOUBLE_EQ(roles.instruments[2].temperature_offset_c, 0.5);
  EXPECT_EQ(roles.instruments[0].model, "KP-SIM-LOAD");
  EXPECT_EQ(roles.bench, "cal");  // no [bench] name: the file's stem
  EXPECT_NE(roles.rig_text.find("voltage_gain = 1.01"), std::string::npos);
}

TEST(FileRig, RefusesACellAboveTheRigVoltageAndAWrongInstrument) {
  ServedRig s;
  auto high = s.Open("max_voltage_v = 3.0\n", "", "");
  ASSERT_FALSE(high.ok());
  EXPECT_EQ(high.status().code(), StatusCode::kLimitExceeded);
  EXPECT_NE(high.status().message().find("max_voltage_v"), std::string::npos) << high.status().message();

  std::filesystem::create_directories(s.dir.path() / "profiles");
  std::ofstream(s.dir.File("profiles/other-dmm.kpd"))
      << "roles = [\"meter\"]\nidentity = \"*,OTHER-DMM,*\"\n[commands]\nmeter-read-voltage = \"MEAS:VOLT:DC?\"\n";
  auto text = fmt::format(
      "[[instrument]]\nname = \"l\"\naddress = \"{}\"\nprofile = \"kneepoint-sim\"\nroles = [\"load\", \"thermometer\"]\n"
      "[[instrument]]\nname = \"m\"\naddress = \"{}\"\nprofile = \"other-dmm\"\nroles = [\"meter\"]\n",
      s.server->client_addresses()[0], s.server->client_addresses()[1]);
  std::ofstream(s.dir.File("wrong.toml")) << text;
  RigOpenOptions o;
  o.clock = &s.clock;
  auto wrong = OpenRig(s.dir.File("wrong.toml"), o);
  ASSERT_FALSE(wrong.ok());
  EXPECT_NE(wrong.status().message().find("wrong.toml:6: instrument 'm' answered *IDN? with 'Kneepoint Simulation,KP-SIM-METER"),
            std::string::npos)
      << wrong.status().message();
}

}  // namespace
}  // namespace kp
