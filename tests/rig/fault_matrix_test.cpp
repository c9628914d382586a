// Fault matrix: every fault a bench can meet crossed with every step kind, on
// the simulated rig in virtual time. For every cell of the matrix:
//   - no hang: the run ends within a bounded number of samples and a bounded
//     stretch of virtual time;
//   - no crash (the test process survives; SIGKILL is the one planned death);
//   - the load input (and the supply output) is off at the end;
//   - the run's outcome and reason are stored;
//   - every committed sample is intact: the database passes integrity_check,
//     sample seq runs 0..n-1, times strictly increase, every value is finite
//     and equals a reading the run actually took.
// The matrix is printed as a table (a copy is in DEVELOPERS.md, "Fault matrix").
#include <gtest/gtest.h>
#include <signal.h>
#include <sqlite3.h>
#include <sys/mman.h>
#include <sys/wait.h>
#include <unistd.h>

#include <atomic>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include "drivers/inproc_transport.h"
#include "drivers/scpi_session.h"
#include "drivers/sim/fault_injector.h"
#include "drivers/sim/sim_bench.h"
#include "procedures/procedure_parser.h"
#include "rig/run_controller.h"
#include "tests/support/faulty_vfs.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

enum class Fault {
  kNoReply,
  kGarbage,
  kPartialLine,
  kScpiError,
  kStuckReading,
  kOverflow,
  kLinkDropAndReturn,
  kLinkDropForGood,
  kThermalRunaway,
  kSenseLeadOpen,
  kDatabaseWrite,
  kSigterm,
  kSigkill,
};
constexpr Fault kFaults[] = {Fault::kNoReply,         Fault::kGarbage,         Fault::kPartialLine,    Fault::kScpiError,
                             Fault::kStuckReading,    Fault::kOverflow,        Fault::kLinkDropAndReturn, Fault::kLinkDropForGood,
                             Fault::kThermalRunaway,  Fault::kSenseLeadOpen,   Fault::kDatabaseWrite,  Fault::kSigterm,
                             Fault::kSigkill};

const char* FaultName(Fault f) {
  switch (f) {
    case Fault::kNoReply: return "no reply";
    case Fault::kGarbage: return "garbage reply";
    case Fault::kPartialLine: return "partial line";
    case Fault::kScpiError: return "SCPI error";
    case Fault::kStuckReading: return "stuck reading";
    case Fault::kOverflow: return "overflow 9.9E37";
    case Fault::kLinkDropAndReturn: return "link drop+return";
    case Fault::kLinkDropForGood: return "link drop for good";
    case Fault::kThermalRunaway: return "thermal runaway";
    case Fault::kSenseLeadOpen: return "sense lead open";
    case Fault::kDatabaseWrite: return "database write";
    case Fault::kSigterm: return "SIGTERM";
    case Fault::kSigkill: return "SIGKILL";
  }
  return "?";
}

struct StepKind {
  const char* name;
  const char* text;  // procedure text after the cell and safety lines
};
// Each step kind, bounded to minutes of virtual time so a cell stays fast.
constexpr StepKind kSteps[] = {
    {"rest", "rest 10min every=1s\n"},
    {"CC", "discharge 1C until voltage<=2.75V or time>=10min every=1s\n"},
    {"CP", "discharge 9W until voltage<=2.75V or time>=10min every=1s\n"},
    {"CR", "discharge 3.9Ohm until voltage<=2.75V or time>=10min every=1s\n"},
    {"pulse", "pulse 2C/10s 0A/40s until time>=10min every=500ms\n"},
    {"duty cycle", "duty beat\n  phase high 1A/1s\n  phase low 0A/9s\nend\nplay beat until time>=10min every=1s\n"},
    {"DC-IR", "dcir 0.2C/10s 1C/1s every=100ms\n"},
    {"charge", "charge 0.5C to 4.2V until current<=50mA or time>=10min every=1s\n"},
};

constexpr int kFaultAtQuery = 20;          // the meter's N-th query is the first one hit
constexpr int kMaxSamples = 20000;         // a run taking more samples than this hangs
constexpr double kMaxVirtualS = 3 * 3600;  // safety max-time is 2 h

Plan PlanFor(const StepKind& step) {
  std::string text =
      "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n"
      "safety max-temp=55degC max-current=5A max-time=2h\n";
  text += step.text;
  ParseOutput out = ParseProcedure(text, step.name);
  EXPECT_TRUE(out.ok()) << FormatDiagnostics(step.name, out.errors);
  return out.plan;
}

sim::CellParams MatrixCell() {
  sim::CellParams cell = sim::DemoLiIonCell(2.56);
  cell.initial_soc = 0.6;  // room to charge and to discharge
  return cell;
}

// Breaks the meter's replies from its kFaultAtQuery-th query on.
class MeterFault final : public LineDevice {
 public:
  MeterFault(LineDevice& inner, Fault fault) : inner_(inner), fault_(fault) {}
  std::optional<std::string> HandleLine(std::string_view line) override {
    const bool query = line.find('?') != std::string_view::npos;
    std::optional<std::string> reply = inner_.HandleLine(line);
    if (!query) return reply;
    const int n = ++queries_;
    if (n < kFaultAtQuery) return reply;
    const int k = n - kFaultAtQuery;
    switch (fault_) {
      case Fault::kNoReply:
        if (k % 4 == 0) return std::nullopt;
        break;
      case Fault::kGarbage:
        if (k % 4 == 0) return std::string("#\x7f?!\x01garbage");
        break;
      case Fault::kPartialLine:
        // The rest of the line never comes (cut after four characters).
        if (k % 4 == 0 && reply && reply->size() > 4) return reply->substr(0, 4);
        break;
      case Fault::kOverflow:
        if (k % 5 == 0 && reply) return std::string("9.9E37");
        break;
      case Fault::kLinkDropAndReturn:
        if (k < 8) return std::nullopt;
        break;
      case Fault::kLinkDropForGood:
        return std::nullopt;
      case Fault::kSenseLeadOpen:
        if (reply) return std::string("+1.20000E-03");
        break;
      default:
        break;
    }
    return reply;
  }

 private:
  LineDevice& inner_;
  Fault fault_;
  int queries_ = 0;
};

// A real meter's last digits move; identical readings in a row mean "stuck".
sim::SimOptions WithNoise(sim::SimOptions so) {
  so.meter_noise_v = 0.0002;
  return so;
}

// The simulated bench assembled like SimRig, with the meter behind the fault.
struct FaultRig {
  sim::SimBench bench;
  std::unique_ptr<sim::FaultInjector> injector;
  std::unique_ptr<MeterFault> meter_fault;
  std::unique_ptr<ScpiSession> load_s, meter_s, thermo_s, supply_s;
  std::unique_ptr<LoadDriver> load;
  std::unique_ptr<MeterDriver> meter;
  std::unique_ptr<ThermometerDriver> thermometer;
  std::unique_ptr<SupplyDriver> supply;

  FaultRig(Clock& clock, Fault fault, sim::SimOptions so) : bench(MatrixCell(), clock, WithNoise(so)) {
    LineDevice* meter_dev = &bench.meter();
    if (fault == Fault::kScpiError || fault == Fault::kStuckReading) {
      sim::FaultOptions fo;
      if (fault == Fault::kScpiError) fo.error_every = 5;
      if (fault == Fault::kStuckReading) fo.stick_at = kFaultAtQuery;
      injector = std::make_unique<sim::FaultInjector>(bench.meter(), fo);
      meter_dev = injector.get();
    }
    meter_fault = std::make_unique<MeterFault>(*meter_dev, fault);
    load_s = std::make_unique<ScpiSession>(std::make_unique<InProcTransport>(bench.load(), clock), clock);
    meter_s = std::make_unique<ScpiSession>(std::make_unique<InProcTransport>(*meter_fault, clock), clock);
    thermo_s = std::make_unique<ScpiSession>(std::make_unique<InProcTransport>(bench.thermometer(), clock), clock);
    supply_s = std::make_unique<ScpiSession>(std::make_unique<InProcTransport>(bench.supply(), clock), clock);
    load = std::make_unique<LoadDriver>(*load_s);
    meter = std::make_unique<MeterDriver>(*meter_s);
    meter->SetStuckLimit(30);  // as `stuck_after = 30` in a rig file
    thermometer = std::make_unique<ThermometerDriver>(*thermo_s);
    supply = std::make_unique<SupplyDriver>(*supply_s);
  }
  RigRoles roles() { return RigRoles{load.get(), meter.get(), thermometer.get(), supply.get(), nullptr, "fault matrix"}; }
};

struct CellResult {
  std::string outcome = "-";
  std::string reason;
  int64_t samples = 0;
  bool ok = false;  // every assertion of the cell held
};

// The database checks shared by every cell: integrity, stored outcome and
// reason, and intact samples (each one a reading the run took, when known).
void CheckDatabase(const std::string& db, const std::map<double, Reading>* observed, CellResult& cell,
                   bool expect_interrupted) {
  SteadyClock wall;
  auto store = Store::Open(db, wall);
  ASSERT_TRUE(store.ok()) << store.status().ToString();
  auto ic = (*store)->db().Prepare("PRAGMA integrity_check");
  ASSERT_TRUE(ic.ok());
  ASSERT_TRUE(*ic->Step());
  EXPECT_EQ(ic->Text(0), "ok");
  // A run whose runner died is found and marked when the database is next opened.
  ASSERT_TRUE((*store)->ReconcileOrphans().ok());
  auto runs = (*store)->ListRuns();
  ASSERT_TRUE(runs.ok());
  ASSERT_EQ(runs->size(), 1u) << "one run recorded";
  const RunRow& run = runs->back();
  cell.outcome = OutcomeName(run.outcome);
  cell.reason = run.reason;
  EXPECT_NE(run.outcome, Outcome::kRunning) << "the outcome is stored";
  EXPECT_FALSE(run.reason.empty()) << "the reason is stored";
  if (expect_interrupted) {
    EXPECT_EQ(run.outcome, Outcome::kInterrupted);
  }
  auto q = (*store)->db().Prepare("SELECT COUNT(*), COALESCE(MIN(seq),0), COALESCE(MAX(seq),-1) FROM samples WHERE run_id=?1");
  ASSERT_TRUE(q.ok());
  q->Bind(1, run.id);
  ASSERT_TRUE(*q->Step());
  cell.samples = q->Int(0);
  EXPECT_EQ(q->Int(1), 0);
  EXPECT_EQ(q->Int(2), cell.samples - 1) << "no sample missing or twice";
  auto samples = (*store)->LoadSamples(run.id);
  ASSERT_TRUE(samples.ok());
  for (size_t i = 0; i < samples->size(); ++i) {
    const Sample& s = (*samples)[i];
    ASSERT_TRUE(std::isfinite(s.t_s) && std::isfinite(s.voltage_v) && std::isfinite(s.current_a) &&
                std::isfinite(s.temperature_c))
        << "sample " << i;
    if (i > 0) {
      ASSERT_GT(s.t_s, (*samples)[i - 1].t_s) << "sample " << i;
    }
    if (observed) {
      auto it = observed->find(s.t_s);
      ASSERT_NE(it, observed->end()) << "sample " << i << " at t=" << s.t_s << " was never read";
      ASSERT_EQ(it->second.voltage_v, s.voltage_v) << "sample " << i;
      ASSERT_EQ(it->second.current_a, s.current_a) << "sample " << i;
      ASSERT_EQ(it->second.temperature_c, s.temperature_c) << "sample " << i;
    }
  }
}

// One in-process cell (every fault but SIGKILL).
CellResult RunCell(Fault fault, const StepKind& step, const std::string& db, testing::FaultyVfs& vfs) {
  CellResult cell;
  VirtualClock clock;
  Plan plan = PlanFor(step);
  sim::SimOptions so;
  if (fault == Fault::kThermalRunaway) {
    so.runaway_start_s = 2;
    so.runaway_heat_rate_w_per_s = 40;  // fast enough to overheat inside the shortest step
  }
  FaultRig rig(clock, fault, so);
  std::map<double, Reading> observed;
  {
    Store::Options sto;
    sto.commit_interval_s = 5;  // on the virtual clock: several commits in every cell
    if (fault == Fault::kDatabaseWrite) sto.vfs = vfs.name();
    auto store = Store::Open(db, clock, sto);
    EXPECT_TRUE(store.ok()) << store.status().ToString();
    if (!store.ok()) return cell;
    // One write fails while samples are being committed; the disk then recovers.
    if (fault == Fault::kDatabaseWrite) vfs.FailWrite(40, SQLITE_IOERR_WRITE, /*one_shot=*/true);
    std::atomic<bool> stop{false};
    int taken = 0;
    bool hung = false;
    RunOptions o;
    o.cell_name = std::string("matrix ") + FaultName(fault) + " / " + step.name;
    o.stop = &stop;
    o.stop_reason = "stopped by operator (SIGTERM)";
    o.on_sample = [&](const Reading& r, double) {
      observed[r.t_s] = r;
      if (fault == Fault::kSigterm && taken == kFaultAtQuery) stop = true;
      if (++taken > kMaxSamples) {
        hung = true;
        stop = true;
      }
    };
    RunController rc(**store, clock, rig.roles());
    auto r = rc.Execute(plan, o);
    EXPECT_TRUE(r.ok()) << r.status().ToString();
    EXPECT_FALSE(hung) << "more than " << kMaxSamples << " samples";
    EXPECT_LT(clock.Now().count(), kMaxVirtualS) << "virtual time ran away";
    EXPECT_FALSE(rig.bench.load_input_on()) << "load input left on";
    EXPECT_FALSE(rig.bench.supply_output_on()) << "supply output left on";
    if (fault == Fault::kDatabaseWrite) {
      EXPECT_EQ(vfs.failed(), 1) << "the write failure was injected";
      vfs.Heal();
    }
    if (fault == Fault::kSigterm && r.ok()) {
      EXPECT_EQ(r->outcome, Outcome::kAborted);
      EXPECT_NE(r->reason.find("SIGTERM"), std::string::npos) << r->reason;
    }
    if (fault == Fault::kThermalRunaway && r.ok()) {
      EXPECT_EQ(r->outcome, Outcome::kAborted);
      EXPECT_NE(r->reason.find("temperature"), std::string::npos) << r->reason;
    }
    if (fault == Fault::kLinkDropForGood && r.ok()) {
      EXPECT_EQ(r->outcome, Outcome::kAborted) << r->reason;
      EXPECT_NE(r->reason.find("instrument lost"), std::string::npos) << r->reason;
    }
    // A link that comes back within the grace period costs a gap, not the run.
    if (fault == Fault::kLinkDropAndReturn && r.ok()) {
      EXPECT_EQ(r->outcome, Outcome::kCompleted) << r->reason;
      auto events = (*store)->LoadEvents(r->run_id);
      EXPECT_TRUE(events.ok());
      int gaps = 0;
      if (events.ok())
        for (const EventRow& e : *events) gaps += e.kind == "gap";
      EXPECT_EQ(gaps, 1) << "the outage is logged once as a gap";
    }
  }
  CheckDatabase(db, &observed, cell, false);
  // The failure struck mid-run: samples committed before it are there.
  if (fault == Fault::kDatabaseWrite) EXPECT_GT(cell.samples, 0);
  return cell;
}

// Shared with a forked runner: samples its store has committed, and whether
// it is parked mid-run waiting for the kill.
struct KillShared {
  std::atomic<int64_t> committed{0};
  std::atomic<bool> parked{false};
};

// SIGKILL: a child process runs the step in virtual time; once its store has
// committed a few samples it parks inside the run (load on, run open, a batch
// staged) and the parent kills it there — no race with the run's own end.
CellResult KillCell(const StepKind& step, const std::string& db) {
  CellResult cell;
  Plan plan = PlanFor(step);
  void* mem = mmap(nullptr, sizeof(KillShared), PROT_READ | PROT_WRITE, MAP_SHARED | MAP_ANONYMOUS, -1, 0);
  EXPECT_NE(mem, MAP_FAILED);
  if (mem == MAP_FAILED) return cell;
  auto* shared = new (mem) KillShared();
  pid_t pid = fork();
  if (pid == 0) {
    VirtualClock clock;
    Store::Options sto;
    sto.commit_interval_s = 2;  // on the virtual clock
    auto store = Store::Open(db, clock, sto);
    if (!store.ok()) _exit(10);
    FaultRig rig(clock, Fault::kSigkill, {});
    RunController rc(**store, clock, rig.roles());
    RunOptions o;
    o.on_sample = [&](const Reading&, double) {
      shared->committed.store((*store)->committed_samples());
      if ((*store)->committed_samples() >= 3) {
        shared->parked.store(true);
        for (;;) pause();
      }
    };
    (void)rc.Execute(plan, o);
    _exit(20);  // finished without parking: the parent reports it
  }
  EXPECT_GT(pid, 0);
  // Wait (bounded) for the runner to park, then kill.
  for (int i = 0; i < 20000 && !shared->parked.load(); ++i) std::this_thread::sleep_for(std::chrono::milliseconds(1));
  EXPECT_TRUE(shared->parked.load()) << "the runner never committed samples";
  int64_t committed = shared->committed.load();
  kill(pid, SIGKILL);
  int status = 0;
  waitpid(pid, &status, 0);
  EXPECT_TRUE(WIFSIGNALED(status) && WTERMSIG(status) == SIGKILL) << "runner ended before the kill";
  munmap(mem, sizeof(KillShared));
  CheckDatabase(db, nullptr, cell, true);
  EXPECT_GE(cell.samples, committed) << "a committed sample is missing";
  return cell;
}

// Failed assertions recorded so far in the running test.
int FailureCount() {
  return ::testing::UnitTest::GetInstance()->current_test_info()->result()->total_part_count();
}

TEST(FaultMatrix, EveryFaultWithEveryStepKindEndsSafelyAndKeepsTheLog) {
  testing::TempDir dir;
  testing::FaultyVfs vfs("kp-matrix");
  std::map<std::pair<int, int>, CellResult> table;
  int cells = 0, passed = 0;
  for (size_t fi = 0; fi < std::size(kFaults); ++fi) {
    for (size_t si = 0; si < std::size(kSteps); ++si) {
      const Fault f = kFaults[fi];
      const StepKind& s = kSteps[si];
      SCOPED_TRACE(std::string(FaultName(f)) + " x " + s.name);
      const std::string db = dir.File("m" + std::to_string(fi) + "_" + std::to_string(si) + ".db");
      const int failures_before = FailureCount();
      CellResult c = f == Fault::kSigkill ? KillCell(s, db) : RunCell(f, s, db, vfs);
      c.ok = FailureCount() == failures_before;
      table[{static_cast<int>(fi), static_cast<int>(si)}] = c;
      ++cells;
      passed += c.ok;
    }
  }
  // The table: one row per fault, one column per step kind; each cell shows
  // the stored outcome (C completed, A aborted, I interrupted) and the
  // sample count, with '!' where an assertion failed.
  std::printf("\nfault matrix: %d faults x %d step kinds = %d cells, %d passed\n", static_cast<int>(std::size(kFaults)),
              static_cast<int>(std::size(kSteps)), cells, passed);
  std::printf("%-20s", "fault \\ step");
  for (const StepKind& s : kSteps) std::printf("| %-11s", s.name);
  std::printf("\n");
  for (size_t fi = 0; fi < std::size(kFaults); ++fi) {
    std::printf("%-20s", FaultName(kFaults[fi]));
    for (size_t si = 0; si < std::size(kSteps); ++si) {
      const CellResult& c = table[{static_cast<int>(fi), static_cast<int>(si)}];
      std::string o = c.outcome.empty() ? "?" : std::string(1, static_cast<char>(std::toupper(c.outcome[0])));
      std::printf("| %s%s %-8lld", c.ok ? " " : "!", o.c_str(), static_cast<long long>(c.samples));
    }
    std::printf("\n");
  }
  std::printf("reasons (first step kind of each fault):\n");
  for (size_t fi = 0; fi < std::size(kFaults); ++fi)
    std::printf("  %-20s %s\n", FaultName(kFaults[fi]), table[{static_cast<int>(fi), 1}].reason.c_str());
  EXPECT_EQ(passed, cells);
}

// SIGTERM for real: `kneepoint run` in a child process gets the signal while
// running on the simulated rig at a finite speed; it must exit, record the
// run as aborted by the operator with the load off, and keep its samples.
TEST(FaultMatrix, SigtermEndsKneepointRunAsAbortedWithTheLogIntact) {
  testing::TempDir dir;
  const std::string proc = dir.File("long.kpp");
  {
    std::ofstream out(proc);
    out << "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n"
           "safety max-temp=55degC max-time=10h\n"
           "discharge 0.2C until voltage<=2.75V every=1s\n";
  }
  const std::string db = dir.File("term.db");
  pid_t pid = testing::SpawnKneepoint(
      {"run", proc, "--rig", "sim", "--db", db, "--cell", "term-cell", "--speed", "500", "--progress", "100000s"});
  ASSERT_GT(pid, 0);
  // Wait until the run has committed samples (bounded), then send SIGTERM.
  int64_t seen = 0;
  for (int i = 0; i < 200 && seen < 3; ++i) {
    std::this_thread::sleep_for(std::chrono::milliseconds(25));
    SteadyClock wall;
    Store::Options ro;
    ro.create = false;
    ro.read_only = true;
    auto store = Store::Open(db, wall, ro);
    if (!store.ok()) continue;
    auto runs = (*store)->ListRuns();
    if (runs.ok() && !runs->empty()) {
      auto s = (*store)->LoadSamples(runs->back().id);
      if (s.ok()) seen = static_cast<int64_t>(s->size());
    }
  }
  ASSERT_GE(seen, 3) << "the run never logged";
  kill(pid, SIGTERM);
  int status = 0;
  ASSERT_EQ(waitpid(pid, &status, 0), pid);
  ASSERT_TRUE(WIFEXITED(status)) << "kneepoint run died from the signal instead of handling it";
  CellResult cell;
  CheckDatabase(db, nullptr, cell, false);
  EXPECT_EQ(cell.outcome, "aborted");
  EXPECT_NE(cell.reason.find("operator"), std::string::npos) << cell.reason;
  EXPECT_GE(cell.samples, seen);
  std::printf("SIGTERM after %lld samples: %s (%s), %lld samples kept\n", static_cast<long long>(seen),
              cell.outcome.c_str(), cell.reason.c_str(), static_cast<long long>(cell.samples));
}

}  // namespace
}  // namespace kp
