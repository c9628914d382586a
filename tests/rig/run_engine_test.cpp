// Procedures run end to end on the simulated bench (SimRig + VirtualClock +
// Store in a temp dir): each step kind reaches its end, pulse edges and
// duty-cycle charge follow the program, DC-IR matches the logged samples, and
// every abort leaves the load off with its reason stored.
#include <fmt/format.h>
#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <sstream>

#include "analysis/metrics.h"
#include "drivers/inproc_transport.h"
#include "drivers/supply.h"
#include "procedures/procedure_parser.h"
#include "rig/run_controller.h"
#include "rig/sim_rig.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

// The procedures describe the 2500 mAh cell that sim::DemoLiIonCell(2.56) simulates.
const char* const kCell = testing::kCell2500Line;
Plan Compile(const std::string& body) { return testing::CompileForCell2500(body); }

struct Bench {
  testing::TempDir dir;
  SteadyClock wall;
  VirtualClock clock;
  std::unique_ptr<Store> store;
  std::unique_ptr<SimRig> rig;
  explicit Bench(sim::SimOptions so = {}, double capacity_ah = 2.56) {
    auto s = Store::Open(dir.File("run.db"), wall);
    EXPECT_TRUE(s.ok()) << s.status().ToString();
    store = std::move(*s);
    rig = std::make_unique<SimRig>(clock, sim::DemoLiIonCell(capacity_ah), so);
  }
  RunResult Run(const Plan& plan) {
    RunController rc(*store, clock, rig->roles());
    RunOptions o;
    o.cell_name = "sim-A";
    auto r = rc.Execute(plan, o);
    EXPECT_TRUE(r.ok()) << r.status().ToString();
    return r.ok() ? *r : RunResult{};
  }
  std::vector<Sample> Samples(int64_t id) { return *store->LoadSamples(id); }
  std::vector<StepRow> Steps(int64_t id) { return *store->LoadSteps(id); }
  std::vector<EventRow> Events(int64_t id) { return *store->LoadEvents(id); }
};

std::vector<Sample> OfStep(const std::vector<Sample>& all, int step) {
  std::vector<Sample> out;
  for (const Sample& s : all)
    if (s.step == step) out.push_back(s);
  return out;
}

TEST(RunEngine, FirstSampleIsOpenCircuitAtTimeZero) {
  Bench b;
  RunResult r = b.Run(Compile("discharge 1A until time>=10s\n"));
  auto s = b.Samples(r.run_id);
  ASSERT_GE(s.size(), 3u);
  EXPECT_DOUBLE_EQ(s[0].t_s, 0.0);
  EXPECT_DOUBLE_EQ(s[0].current_a, 0.0);
  // The next reading follows the load edge closely, at Plan::edge_settle_s.
  EXPECT_NEAR(s[1].t_s, 0.05, 1e-9);
  EXPECT_NEAR(s[1].current_a, 1.0, 1e-6);
  // Open-circuit minus loaded voltage is the sim cell's 45 mOhm times 1 A.
  EXPECT_NEAR(s[0].voltage_v - s[1].voltage_v, 0.045, 0.001);
}

TEST(RunEngine, EachStepKindReachesItsEnd) {
  Bench b;
  Plan p = Compile(
      "duty node\n  phase sleep 10mA/8s\n  phase burst 400mA/2s\nend\n"
      "rest 10min every=10s\n"
      "discharge 1A until voltage<=3.7V\n"
      "discharge 3W until voltage<=3.6V\n"
      "discharge 10Ohm until time>=5min\n"
      "pulse 2A/5s 200mA/15s until voltage<=3.5V\n"
      "play node until time>=10min\n"
      "dcir 0.2C/10s 1C/1s every=1s\n"
      "discharge 1A until charge>=100mAh\n"
      "discharge 1A until energy>=0.2Wh\n");
  RunResult r = b.Run(p);
  ASSERT_EQ(r.outcome, Outcome::kCompleted) << r.reason;
  EXPECT_FALSE(b.rig->bench().load_input_on());
  auto steps = b.Steps(r.run_id);
  ASSERT_EQ(steps.size(), 9u);
  const char* want[] = {"time 600.0 s",        "voltage",      "voltage",   "time 300.0 s", "voltage", "time 600.0 s",
                        "resistance measured", "charge 100.0", "energy 0.2"};
  for (size_t i = 0; i < steps.size(); ++i)
    EXPECT_NE(steps[i].end_reason.find(want[i]), std::string::npos) << i << ": " << steps[i].end_reason;
  auto all = b.Samples(r.run_id);
  // Constant power holds V * I at 3 W; constant resistance holds V / I at 10 Ohm.
  for (const Sample& s : OfStep(all, 2))
    if (s.current_a > 0.5) {
      EXPECT_NEAR(s.voltage_v * s.current_a, 3.0, 0.01) << s.t_s;
    }
  for (const Sample& s : OfStep(all, 3))
    if (s.current_a > 0.1) {
      EXPECT_NEAR(s.voltage_v / s.current_a, 10.0, 0.05) << s.t_s;
    }
  // Rest ends on time exactly (the engine wakes at the end, not a period late).
  EXPECT_DOUBLE_EQ(*steps[0].ended_s - steps[0].started_s, 600.0);
}

// Edges found in the log (a current jump between consecutive samples) match
// the programmed times within one sample.
TEST(RunEngine, PulseTrainEdgesMatchTheProgram) {
  Bench b;
  Plan p = Compile("rest 3s\npulse 2A/7s 300mA/13s until time>=10min every=3s\n");
  RunResult r = b.Run(p);
  ASSERT_EQ(r.outcome, Outcome::kCompleted) << r.reason;
  double start = b.Steps(r.run_id)[1].started_s;
  EXPECT_DOUBLE_EQ(start, 3.0);
  auto s = b.Samples(r.run_id);
  std::vector<double> programmed;
  for (double t = 0; t < 600 - 1e-9; t += 20) {
    programmed.push_back(start + t);
    programmed.push_back(start + t + 7);
  }
  std::vector<std::pair<double, double>> found;  // (before, after) sample times around each jump
  for (size_t i = 1; i < s.size(); ++i)
    if (s[i].t_s > start && s[i].t_s < start + 600 && std::abs(s[i].current_a - s[i - 1].current_a) > 0.5)
      found.push_back({s[i - 1].t_s, s[i].t_s});
  ASSERT_EQ(found.size(), programmed.size());
  for (size_t k = 0; k < found.size(); ++k) {
    double gap = found[k].second - found[k].first;
    EXPECT_LE(gap, 3.0);
    EXPECT_LE(std::abs(found[k].second - programmed[k]), gap + 1e-9) << "edge " << k;
    EXPECT_GE(found[k].second, programmed[k] - 1e-9);
  }
}

TEST(RunEngine, DutyCycleAverageEqualsTheProfile) {
  Bench b;
  // The compressed phase runs 3 s instead of 60 s; the run's cycle is
  // 3 + 0.5 + 1.2 + 0.3 = 5 s.
  Plan p = Compile(
      "duty node\n  phase sleep 50uA/60s\n  phase sense 8mA/500ms\n  phase radio 120mA/1.2s\n  phase listen 30mA/300ms\nend\n"
      "play node compress=3s until time>=10min every=1s\n");
  RunResult r = b.Run(p);
  ASSERT_EQ(r.outcome, Outcome::kCompleted) << r.reason;
  auto s = OfStep(b.Samples(r.run_id), 0);
  ASSERT_NEAR(s.back().t_s, 600.0, 1e-9);
  // Time-weighted average of the run profile, computed here independently.
  double expected_a = (50e-6 * 3.0 + 8e-3 * 0.5 + 120e-3 * 1.2 + 30e-3 * 0.3) / (3.0 + 0.5 + 1.2 + 0.3);
  double measured_a = DeliveredChargeMah(s) * 3.6 / 600.0;
  EXPECT_NEAR(measured_a / expected_a, 1.0, 0.002) << measured_a << " A vs " << expected_a << " A";
  // Sampling once a second regardless of the profile (every=1s, no edges)
  // would alias; here every segment holds at least one sample.
  int sleep_samples = 0;
  for (const Sample& x : s) sleep_samples += (x.current_a > 0 && x.current_a < 1e-4) ? 1 : 0;
  EXPECT_GE(sleep_samples, 120);  // 120 sleep phases in 600 s
}

// IEC 61960-3 clause 7.7 (secondary source): R_dc = (U1 - U2) / (I2 - I1), U1
// at the end of I1 = 0.2 It for 10 s, U2 at the end of I2 = 1 It for 1 s.
TEST(RunEngine, ResistanceResultEqualsLoggedSamples) {
  Bench b;
  RunResult r = b.Run(Compile("rest 1min\ndcir 0.2C/10s 1C/1s every=1s\nrest 1min\n"));
  ASSERT_EQ(r.outcome, Outcome::kCompleted) << r.reason;
  double reported = -1;
  for (const EventRow& e : b.Events(r.run_id))
    if (e.kind == "result") {
      ASSERT_EQ(std::sscanf(e.message.c_str(), "dc-resistance: R_dc = %lf Ohm", &reported), 1) << e.message;
    }
  ASSERT_GT(reported, 0);
  auto s = b.Samples(r.run_id);
  const Sample *u1 = nullptr, *u2 = nullptr;
  for (const Sample& x : s) {
    if (std::abs(x.t_s - 70.0) < 1e-9) u1 = &x;
    if (std::abs(x.t_s - 71.0) < 1e-9) u2 = &x;
  }
  ASSERT_TRUE(u1 && u2);
  EXPECT_NEAR(u1->current_a, 0.5, 1e-6);
  EXPECT_NEAR(u2->current_a, 2.5, 1e-6);
  double from_log = (u1->voltage_v - u2->voltage_v) / (u2->current_a - u1->current_a);
  EXPECT_NEAR(reported, from_log, 1e-5 * from_log);
  // The simulated cell is a 45 mOhm series resistance (plus its OCV slope over 1 s).
  EXPECT_NEAR(from_log, 0.045, 0.002);
}

TEST(RunEngine, LogOnChangeKeepsLongRestsSmall) {
  Bench b;
  RunResult r = b.Run(Compile("discharge 1A until time>=10min\nrest 2h every=1s log-change=2mV log-gap=10min\n"));
  ASSERT_EQ(r.outcome, Outcome::kCompleted) << r.reason;
  auto rest = OfStep(b.Samples(r.run_id), 1);
  EXPECT_LT(rest.size(), 100u);  // instead of 7200
  EXPECT_GE(rest.size(), 12u);   // at least one per log-gap
  for (size_t i = 1; i < rest.size(); ++i) EXPECT_LE(rest[i].t_s - rest[i - 1].t_s, 600.0 + 1e-9);
}

// Log-on-change never drops the readings around an edge: the stored samples
// of a pulse train still add up to the train's mean current.
TEST(RunEngine, LogOnChangeKeepsPulseEdges) {
  Bench b;
  RunResult r = b.Run(Compile("pulse 2A/2s 0A/8s until time>=10min every=1s log-change=200mV\n"));
  ASSERT_EQ(r.outcome, Outcome::kCompleted) << r.reason;
  auto s = OfStep(b.Samples(r.run_id), 0);
  double mean_a = DeliveredChargeMah(s) * 3.6 / 600.0;
  EXPECT_NEAR(mean_a, 2.0 * 2.0 / 10.0, 0.002);
}

TEST(RunEngine, LoopsRunOnTheSimulator) {
  Bench b({}, 0.5);  // small cell so the sweep is short
  Plan p = Compile(
      "safety min-voltage=2.5V\nrepeat until voltage<=3.3V\n  dcir 0.2C/10s 1C/1s every=1s\n  discharge 1A until "
      "charge>=250mAh\n  rest 5min\nend\n");
  RunResult r = b.Run(p);
  ASSERT_EQ(r.outcome, Outcome::kCompleted) << r.reason;
  int results = 0;
  for (const EventRow& e : b.Events(r.run_id)) results += e.kind == "result" ? 1 : 0;
  EXPECT_GE(results, 1);
  EXPECT_NE(r.reason.find("repeat (line 3) done: voltage"), std::string::npos) << r.reason;
}

// ---- aborts: the load goes off and the reason is stored ----

void ExpectAbortedWithLoadOff(Bench& b, const RunResult& r, const char* reason) {
  EXPECT_EQ(r.outcome, Outcome::kAborted);
  EXPECT_NE(r.reason.find(reason), std::string::npos) << r.reason;
  EXPECT_FALSE(b.rig->bench().load_input_on());
  auto row = b.store->GetRun(r.run_id);
  ASSERT_TRUE(row.ok());
  EXPECT_EQ(row->outcome, Outcome::kAborted);
  EXPECT_NE(row->reason.find(reason), std::string::npos) << row->reason;
  auto events = b.Events(r.run_id);
  ASSERT_FALSE(events.empty());
  EXPECT_EQ(events.back().kind, "abort");
}

TEST(RunEngineAborts, OverTemperature) {
  sim::SimOptions so;
  so.runaway_start_s = 300;
  Bench b(so);
  RunResult r = b.Run(Compile("pulse 2A/5s 0A/5s until voltage<=2.75V\n"));
  ExpectAbortedWithLoadOff(b, r, "over-temperature");
}

// The open-circuit reading at t = 0 is judged before the load is ever applied:
// an alkaline procedure on a charged Li-ion cell stops there.
TEST(RunEngineAborts, WrongCellStopsBeforeTheLoadIsApplied) {
  Bench b;
  auto p = ParseProcedure(
      "cell alkaline rated=2500mAh nominal=1.5V max=1.65V cutoff=0.8V\ndischarge 3.9Ohm until voltage<=0.8V\n", "t");
  ASSERT_TRUE(p.ok());
  RunResult r = b.Run(p.plan);
  ExpectAbortedWithLoadOff(b, r, "before start: over-voltage");
  auto s = b.Samples(r.run_id);
  ASSERT_EQ(s.size(), 1u);
  EXPECT_DOUBLE_EQ(s[0].current_a, 0.0);
}

TEST(RunEngineAborts, OverCharge) {
  Bench b;
  RunResult r = b.Run(Compile("safety max-charge=100mAh\ndischarge 1A until voltage<=2.75V\n"));
  ExpectAbortedWithLoadOff(b, r, "charge limit");
  auto s = b.Samples(r.run_id);
  EXPECT_NEAR(DeliveredChargeMah(s), 100.0, 0.5);
}

TEST(RunEngineAborts, InstrumentLoss) {
  testing::TempDir dir;
  SteadyClock wall;
  VirtualClock clock;
  auto store = Store::Open(dir.File("run.db"), wall);
  ASSERT_TRUE(store.ok());
  sim::SimBench bench(sim::DemoLiIonCell(2.56), clock);
  testing::FaultyDevice dying(bench.meter());
  dying.silent_after = 40;
  ScpiSession load_s(std::make_unique<InProcTransport>(bench.load(), clock), clock);
  ScpiSession meter_s(std::make_unique<InProcTransport>(dying, clock), clock);
  ScpiSession temp_s(std::make_unique<InProcTransport>(bench.thermometer(), clock), clock);
  LoadDriver load(load_s);
  MeterDriver meter(meter_s);
  ThermometerDriver thermo(temp_s);
  RunController rc(**store, clock, RigRoles{&load, &meter, &thermo, nullptr, nullptr, "test"});
  auto r = rc.Execute(Compile("pulse 1A/2s 0A/2s until time>=1h\n"), {});
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->outcome, Outcome::kAborted);
  EXPECT_NE(r->reason.find("instrument lost"), std::string::npos) << r->reason;
  EXPECT_FALSE(bench.load_input_on());
  EXPECT_NE((*store)->GetRun(r->run_id)->reason.find("instrument lost"), std::string::npos);
  EXPECT_EQ((*store)->LoadSamples(r->run_id)->size(), 40u);  // every answered reading kept
}

TEST(RunEngineAborts, ChargeWithoutSupplyIsRefusedBeforeStart) {
  Bench b;
  RigRoles roles = b.rig->roles();
  roles.supply = nullptr;  // a rig with a load only
  RunController rc(*b.store, b.clock, roles);
  auto r = rc.Execute(Compile("charge 0.5C to 4.2V until current<=50mA\n"), {});
  ASSERT_FALSE(r.ok());
  EXPECT_NE(r.status().message().find("no supply"), std::string::npos);
  EXPECT_TRUE(b.store->ListRuns()->empty());  // nothing started
}

// Over-temperature set to pause: load off until the cell cools to the resume
// temperature, then the step continues; paused time is not step time.
TEST(RunEngine, HeatPauseResumesWithHysteresis) {
  Bench b;
  // 10 A through 45 mOhm heats the sim cell by about 4.5 W: over 35 degC within minutes.
  Plan p =
      Compile("safety max-temp=35degC when-hot=pause resume-temp=30degC max-current=11A\ndischarge 10A until charge>=1000mAh\n");
  RunResult r = b.Run(p);
  ASSERT_EQ(r.outcome, Outcome::kCompleted) << r.reason;
  auto events = b.Events(r.run_id);
  int pauses = 0, resumes = 0;
  for (const EventRow& e : events) {
    pauses += e.kind == "pause";
    resumes += e.kind == "resume";
  }
  EXPECT_GE(pauses, 1);
  EXPECT_EQ(pauses, resumes);
  auto s = b.Samples(r.run_id);
  double paused_s = 0;
  for (size_t i = 1; i < s.size(); ++i) {
    EXPECT_LT(s[i].temperature_c, 36.0);
    if (s[i].current_a == 0.0 && s[i - 1].current_a == 0.0) paused_s += s[i].t_s - s[i - 1].t_s;
  }
  EXPECT_GT(paused_s, 60.0);
  auto steps = b.Steps(r.run_id);
  EXPECT_NE(steps[0].end_reason.find("charge 1000"), std::string::npos) << steps[0].end_reason;
  EXPECT_NEAR(DeliveredChargeMah(s), 1000.0, 3.0);
}

// A bench supply stand-in: constant current for 60 s, then a current taper
// with a 300 s time constant (a cell reaching its CV voltage). It also notes
// whether the load was ever on while its output was.
class TaperingSupply final : public LineDevice {
 public:
  TaperingSupply(Clock& clock, sim::SimBench& bench) : clock_(clock), bench_(bench) {}
  std::optional<std::string> HandleLine(std::string_view line) override {
    std::string l(line);
    double now = clock_.Now().count();
    if (l.rfind("VOLT ", 0) == 0)
      volts = std::stod(l.substr(5));
    else if (l.rfind("CURR ", 0) == 0)
      limit_a = std::stod(l.substr(5));
    else if (l == "OUTP ON")
      on = true, on_since = now;
    else if (l == "OUTP OFF")
      on = false;
    else if (l == "MEAS:CURR?") {
      overlap = overlap || (on && bench_.load_input_on());
      double t = now - on_since;
      double a = !on ? 0.0 : t < 60 ? limit_a : limit_a * std::exp(-(t - 60) / 300);
      return fmt::format("{:.6f}", a);
    } else if (l == "MEAS:VOLT?") {
      return fmt::format("{:.6f}", volts);
    }
    return std::nullopt;
  }
  bool on = false, overlap = false;
  double volts = 0, limit_a = 0, on_since = 0;

 private:
  Clock& clock_;
  sim::SimBench& bench_;
};

TEST(RunEngine, ChargeStepDrivesTheSupplyUntilTaper) {
  Bench b;
  TaperingSupply dev(b.clock, b.rig->bench());
  ScpiSession session(std::make_unique<InProcTransport>(dev, b.clock), b.clock);
  SupplyDriver supply(session);
  RigRoles roles = b.rig->roles();
  roles.supply = &supply;
  RunController rc(*b.store, b.clock, roles);
  auto r = rc.Execute(Compile("discharge 1A until time>=1min\ncharge 1A to 4.2V until current<=100mA every=5s\nrest 1min\n"), {});
  ASSERT_TRUE(r.ok()) << r.status().ToString();
  ASSERT_EQ(r->outcome, Outcome::kCompleted) << r->reason;
  EXPECT_FALSE(dev.on);
  EXPECT_FALSE(dev.overlap);  // never loading and charging at once
  EXPECT_DOUBLE_EQ(dev.volts, 4.2);
  EXPECT_DOUBLE_EQ(dev.limit_a, 1.0);
  auto steps = b.Steps(r->run_id);
  ASSERT_EQ(steps.size(), 3u);
  EXPECT_NE(steps[1].end_reason.find("current 0.0"), std::string::npos) << steps[1].end_reason;
  // 1 A tapers to 0.1 A after 60 s + 300 s x ln 10 = 750.8 s; readings every 5 s.
  double charge_s = *steps[1].ended_s - steps[1].started_s;
  EXPECT_GE(charge_s, 750.8);
  EXPECT_LE(charge_s, 750.8 + 5.0);
  // Charging is logged as negative cell current.
  auto s = OfStep(b.Samples(r->run_id), 1);
  ASSERT_GT(s.size(), 100u);
  EXPECT_NEAR(s[5].current_a, -1.0, 1e-6);
}

// The ready procedures that need only a load run to completion on the simulator.
TEST(RunEngine, LibraryProceduresRunOnTheSimulator) {
  auto dir = testing::SourcePath("procedures/library");
  for (const char* name : {"dcir-sweep.kpp", "hppc-pulses.kpp", "pulsed-2a-quarter-duty.kpp"}) {
    std::ifstream in(dir / name);
    std::stringstream ss;
    ss << in.rdbuf();
    auto plan = CompileProcedure(ss.str(), name);
    ASSERT_TRUE(plan.ok()) << plan.status().message();
    Bench b;
    RunResult r = b.Run(*plan);
    EXPECT_EQ(r.outcome, Outcome::kCompleted) << name << ": " << r.reason;
    EXPECT_FALSE(b.rig->bench().load_input_on());
  }
}

}  // namespace
}  // namespace kp
