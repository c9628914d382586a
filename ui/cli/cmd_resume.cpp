// `resume`: continue an interrupted run on the same rig (watched by a guardian
// on a rig file, like `run`).
#include <fmt/format.h>

#include <algorithm>
#include <fstream>
#include <iostream>
#include <sstream>

#include "drivers/sim/cell_file.h"
#include "rig/channel_bench.h"
#include "rig/control_channel.h"
#include "rig/resume.h"
#include "rig/rig.h"
#include "rig/run_lock.h"
#include "rig/safety_monitor.h"
#include "rig/sim_rig.h"
#include "rig/store_open.h"
#include "ui/cli/cli.h"
#include "ui/cli/run_bench_cmd.h"
#include "ui/cli/run_guard.h"
#include "ui/report/run_report.h"

namespace kp::cli {
namespace {

struct ResumeOptions {
  std::string db_path = "kneepoint.db";
  int64_t run_id = 0;
  std::string rig = "sim";
  double speed = 0.0;
  std::string procedure_file;
  double link_grace_s = 30.0;
  double hang_limit_s = 0.0;  // 0: DefaultHangLimitS
};

// The simulated cell of a logged run, continued: the cell recorded with the
// run (event "sim-cell"; runs logged before it existed: the preset of the
// run's chemistry at its rating, full at the start) integrated over the
// logged samples.
Result<sim::CellParams> SimCellOfRun(Store& store, const RunRow& run) {
  KP_ASSIGN_OR_RETURN(std::vector<EventRow> events, store.LoadEvents(run.id));
  SimCellChoice choice{run.chemistry, run.rated_mah, 0, 1.0};
  auto names = sim::BuiltInCellNames();
  if (std::find(names.begin(), names.end(), choice.preset) == names.end()) choice.preset = "li-ion";
  for (const EventRow& e : events)
    if (e.kind == "sim-cell") {
      KP_ASSIGN_OR_RETURN(choice, ParseSimCellText(e.message));
      break;
    }
  KP_ASSIGN_OR_RETURN(sim::CellParams cell, BuildSimCell(choice));
  KP_ASSIGN_OR_RETURN(std::vector<Sample> samples, store.LoadSamples(run.id));
  cell.start_state = ReplayLoggedCell(cell, samples, events);
  return cell;
}

int RunResume(const ResumeOptions& opt) {
  std::optional<std::string> expected;
  if (!opt.procedure_file.empty()) {
    std::ifstream in(opt.procedure_file);
    if (!in) return Fail(NotFound(fmt::format("cannot read procedure file '{}'", opt.procedure_file)));
    std::ostringstream text;
    text << in.rdbuf();
    expected = text.str();
  }
  const std::atomic<bool>* stop = InstallStopSignals();
  SteadyClock wall;
  auto store = OpenExistingDb(opt.db_path, wall);
  if (!store.ok()) return Fail(store.status());
  std::unique_ptr<Guardian> guardian;
  // Database-only checks first, then the rig: nothing touches an instrument
  // before this process holds the rig's lock.
  auto run = (*store)->GetRun(opt.run_id);
  if (!run.ok()) return Fail(run.status());
  if (run->outcome != Outcome::kInterrupted)
    return Fail(
        InvalidInput(fmt::format("run {} is {}; only an interrupted run can be resumed", opt.run_id, OutcomeName(run->outcome))));
  auto plan = ResumablePlan(**store, opt.run_id, RebuildStoredPlan, expected ? &*expected : nullptr);
  if (!plan.ok()) return Fail(plan.status());
  // A rig file's outputs are watched by a guardian before any is opened. The
  // guardian is a fork: it must not inherit an open SQLite connection (its
  // own would share that connection's lock bookkeeping), so the database is
  // closed around its start.
  if (opt.rig != "sim") {
    store->reset();
    auto started = StartGuardianFor(opt.rig, opt.db_path, opt.link_grace_s, opt.hang_limit_s, LongestSamplePeriodS(*plan), opt.run_id,
                                    SlotOfRun(run->tags).empty() ? std::vector<std::string>{} : std::vector<std::string>{SlotOfRun(run->tags)});
    if (!started.ok()) return Fail(started.status());
    guardian = std::move(*started);
    store = OpenExistingDb(opt.db_path, wall);
    if (!store.ok()) return Fail(store.status());
  }
  RigOpenOptions ro;
  ro.sim_speed = opt.speed;
  if (opt.rig == "sim") {  // the same simulated cell, in the state of the last logged sample
    auto cell = SimCellOfRun(**store, *run);
    if (!cell.ok()) return Fail(cell.status());
    ro.sim_cell = *cell;
  }
  // A run on one channel of a multi-channel bench resumes there (its slot tag).
  auto rig = OpenRigForSlot(opt.rig, ro, SlotOfRun(run->tags));
  if (!rig.ok()) return Fail(rig.status());
  if (Status st = EnableWatchdogFor(opt.rig, *(*rig)->roles().load); !st.ok()) return Fail(st);
  auto lock = AcquireAll(RigLockKeys(**rig), fmt::format("resume of run {} in {}", opt.run_id, opt.db_path));
  if (!lock.ok()) return Fail(lock.status());
  auto point = PrepareResume(**store, opt.run_id, *plan, (*rig)->roles());
  if (!point.ok()) return Fail(point.status());
  std::cout << SafetyCautions() << "\n" << fmt::format("Resuming run {} ({}): {}\n", opt.run_id, plan->name, point->checks);
  ControlChannel control(**store, wall);
  RunOptions options;
  options.stop = stop;
  options.control = &control;
  options.resume = &*point;
  options.link_grace_s = opt.link_grace_s;
  options.on_sample = [&](const Reading&, double) { StopIfGuardianGone(guardian.get(), options); };
  RunController controller(**store, (*rig)->clock(), (*rig)->roles());
  auto result = controller.Execute(*plan, options);
  if (!result.ok()) return Fail(result.status());
  NoteStopSignal(**store, *result);
  // The verdict of the whole record, now that the run has ended again.
  if (auto rep = BuildRunReport(**store, result->run_id); rep.ok()) {
    if (Status st = RecordVerdict(**store, *rep); !st.ok()) std::cerr << "kneepoint: verdict not recorded: " << st.message() << "\n";
  }
  std::cout << fmt::format("run {} {}: {}\n", result->run_id, OutcomeName(result->outcome), result->reason);
  if (result->outcome != Outcome::kCompleted) {
    std::fprintf(stderr, "kneepoint: run %lld %s: %s\n", static_cast<long long>(result->run_id), OutcomeName(result->outcome),
                 result->reason.c_str());
    return kExitFailure;
  }
  return kExitOk;
}

}  // namespace

void RegisterResume(CliRegistry& r) {
  static ResumeOptions opt;
  opt = ResumeOptions{};  // fresh defaults for each command line parsed
  CLI::App* c =
      r.Add("resume", "Continue an interrupted run on the same rig from where it was logged", [] { return RunResume(opt); });
  c->add_option("RUN", opt.run_id, "Run id (see `kneepoint runs`)")->required();
  c->add_option("--db", opt.db_path, "Database file")->capture_default_str();
  c->add_option("--rig", opt.rig, "Rig: 'sim' or a rig file")->capture_default_str();
  c->add_option("--speed", opt.speed, "Simulator only: simulated seconds per wall second (0 = virtual time)");
  c->add_option("--procedure", opt.procedure_file, "Refuse unless this file is the procedure stored with the run");
  AddQuantityOption(c, "--link-grace", opt.link_grace_s, Dimension::kTime,
                    "How long an instrument may stay silent (load off, step held) before the run aborts; 0s: abort at once",
                    0.0, 3600.0);
  AddHangLimitOption(c, opt.hang_limit_s);
}

}  // namespace kp::cli
