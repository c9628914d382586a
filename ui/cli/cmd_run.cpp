// `run FILE --rig sim|RIG.toml --db DB [--cell NAME] [--speed K] [--sim-soc 40%]`:
// executes a procedure on a rig, logging into a database. SIGINT, SIGTERM,
// SIGHUP and SIGQUIT end the run cleanly: load off, run recorded as aborted,
// the signal named in an event. On a rig file a guardian process
// (rig/guardian.h) switches everything off if this process dies any other way.
#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <optional>
#include <iostream>

#include "analysis/duration_format.h"
#include "drivers/sim/cell_file.h"
#include "procedures/estimate.h"
#include "rig/channel_bench.h"
#include "rig/control_channel.h"
#include "rig/lab/lab_sync.h"
#include "rig/lab/pg.h"
#include "rig/load_guards.h"
#include "rig/rig.h"
#include "rig/run_controller.h"
#include "rig/run_lock.h"
#include "rig/safety_monitor.h"
#include "rig/sim_rig.h"
#include "rig/store.h"
#include "ui/cli/cli.h"
#include "ui/cli/procedure_file.h"
#include "ui/cli/record_options.h"
#include "ui/cli/run_bench_cmd.h"
#include "ui/cli/run_guard.h"
#include "ui/report/run_report.h"

namespace kp::cli {
namespace {

struct RunCmdOptions {
  std::string file;
  std::string rig;
  std::string db;
  std::string cell;
  std::string trace;
  std::string sim_cell;
  uint64_t sim_seed = 0;
  std::string sim_soc;
  std::string sim_age;
  std::optional<double> sim_ambient_c;
  double speed = 0.0;
  double progress_s = 600.0;
  double link_grace_s = 30.0;
  double hang_limit_s = 0.0;  // 0: DefaultHangLimitS
  RecordOptions record;
  std::string sync_url;  // --sync: lab database the run is copied to as it goes
  BenchRunArgs bench;  // --slot / --slots / --serials / --batch (ui/cli/run_bench_cmd.h)
};

// Records which simulated cell the run just begun uses (event "sim-cell").
// Called at the run's first reading, before any sample is staged, so the
// event commits nothing but itself; the run is this store's newest running run
// of this cell and procedure. Returns true once done (or impossible).
bool NoteSimCell(Store& store, const Plan& plan, const std::string& cell, const SimCellChoice& choice) {
  auto runs = store.ListRuns();
  if (!runs.ok()) return true;
  for (auto it = runs->rbegin(); it != runs->rend(); ++it) {
    if (it->outcome != Outcome::kRunning || it->cell != cell || it->procedure_name != plan.name) continue;
    (void)store.AddEvent(it->id, 0.0, "sim-cell", SimCellText(choice));
    break;
  }
  return true;
}

int RunRun(const RunCmdOptions& opt) {
  // Several channels of a multi-channel bench at once: ui/cli/cmd_run_bench.cpp.
  if (!opt.bench.slots.empty())
    return RunBenchCommand(opt.file, opt.rig, opt.db, opt.trace, opt.link_grace_s, opt.hang_limit_s, opt.progress_s, opt.record,
                           opt.bench);
  if (!opt.bench.serials.empty() || !opt.bench.batch.empty())
    return Fail(InvalidInput("--serials and --batch go with --slots (the channels of a multi-channel bench)"));
  // First: from here on a stop signal takes the safe-off path and a closed
  // stdout does not kill the run.
  const std::atomic<bool>* stop = InstallStopSignals();
  // A rig file's outputs are watched by a guardian before any is opened.
  double longest_period_s = 0.0;
  if (auto draft = LoadProcedure(opt.file); draft.ok()) longest_period_s = LongestSamplePeriodS(*draft);
  std::vector<std::string> slots;
  if (!opt.bench.slot.empty()) slots.push_back(opt.bench.slot);
  auto guardian = StartGuardianFor(opt.rig, opt.db, opt.link_grace_s, opt.hang_limit_s, longest_period_s, 0, slots);
  if (!guardian.ok()) return Fail(guardian.status());
  RigOpenOptions ro;
  ro.sim_speed = opt.speed;
  SimCellChoice sim_choice;
  if (opt.rig == "sim") {
    // The simulated cell matches the procedure's cell header: the preset of
    // its chemistry (or --sim-cell), built to its rated capacity.
    auto draft = LoadProcedure(opt.file);
    if (!draft.ok()) {
      std::cerr << draft.status().message() << "\n";
      return ExitCodeFor(draft.status());
    }
    std::string preset = opt.sim_cell;
    if (preset.empty()) {
      auto names = sim::BuiltInCellNames();
      bool known = std::find(names.begin(), names.end(), draft->cell.chemistry) != names.end();
      preset = known ? draft->cell.chemistry : "li-ion";
      if (!known)
        std::cerr << fmt::format("kneepoint: no simulated '{}' cell; simulating a li-ion cell (choose one with --sim-cell)\n",
                                 draft->cell.chemistry);
    }
    sim_choice.preset = preset;
    sim_choice.rated_mah = draft->cell.rated_mah;
    sim_choice.seed = opt.sim_seed;
    if (!opt.sim_soc.empty()) {
      auto soc = ParseStateOfCharge(opt.sim_soc, "--sim-soc");
      if (!soc.ok()) return Fail(soc.status());
      sim_choice.start_soc = *soc;
    }
    if (!opt.sim_age.empty()) {
      auto fade = ParsePercentOrFraction(opt.sim_age, "--sim-age", "capacity fade");
      if (!fade.ok()) return Fail(fade.status());
      sim_choice.fade = *fade;
    }
    sim_choice.ambient_c = opt.sim_ambient_c;
    auto params = BuildSimCell(sim_choice);
    if (!params.ok()) return Fail(params.status());
    ro.sim_cell = *params;
  } else if (!opt.sim_soc.empty() || !opt.sim_age.empty() || opt.sim_ambient_c) {
    return Fail(InvalidInput("--sim-soc, --sim-age, --sim-ambient: only for --rig sim (a real cell is as it is)"));
  }
  ro.trace_path = opt.trace;
  auto rig = OpenRigForSlot(opt.rig, ro, opt.bench.slot);
  if (!rig.ok()) return Fail(rig.status());
  RigRoles roles = (*rig)->roles();
  if (Status st = EnableWatchdogFor(opt.rig, *roles.load); !st.ok()) return Fail(st);
  // What this rig can do; a rig file may tighten these further.
  auto plan = LoadProcedure(opt.file, PlanLimitsFor(**rig));
  if (!plan.ok()) {
    std::cerr << plan.status().message() << "\n";
    return ExitCodeFor(plan.status());
  }
  for (const std::string& w : plan->warnings) std::cerr << opt.file << ":" << w.substr(5) << " (warning)\n";
  std::string cell = opt.cell;
  if (cell.empty()) {
    if (opt.rig != "sim")
      return Fail(
          InvalidInput("give the cell under test a name with --cell (its label or serial), so its runs can be found later"));
    // The simulator's cell is described by the procedure itself.
    cell = fmt::format("sim-{}-{:.0f}mAh", plan->cell.chemistry, plan->cell.rated_mah);
  }

  std::cout << SafetyCautions() << "\n" << DescribePlan(*plan, EstimatePlan(*plan, sim_choice.start_soc)) << "\n";
  SteadyClock wall;
  if (pg::IsPostgresUrl(opt.db))
    return Fail(InvalidInput("--db: a run logs into the bench's own SQLite file; copy it to the lab database with --sync URL"));
  auto store = Store::Open(opt.db, wall);
  if (!store.ok()) return Fail(store.status());

  // One runner per rig: nothing is switched on before this process holds the
  // instruments' lock.
  auto lock = AcquireAll(RigLockKeys(**rig), fmt::format("'{}' on cell '{}' into {}", plan->name, cell, opt.db));
  if (!lock.ok()) return Fail(lock.status());
  ControlChannel control(**store, wall);
  RunController controller(**store, (*rig)->clock(), roles);
  RunOptions run;
  run.control = &control;
  run.cell_name = cell;
  if (Status st = FillRecord(opt.record, run.record); !st.ok()) return Fail(st);
  if (!opt.bench.slot.empty()) run.record.tags.push_back(SlotTag(opt.bench.slot));
  run.stop = stop;
  run.stop_reason = "stopped by operator (signal)";
  if (std::string warn = MissingGuardsWarning(*roles.load); !warn.empty()) {
    std::cout << warn << "\n";
    std::cerr << "kneepoint: " << warn << "\n";
  }
  CrashInjection crash = CrashInjectionFromEnv();
  run.link_grace_s = opt.link_grace_s;
  double next_report = 0.0;
  Guardian* watcher = guardian->get();
  bool sim_cell_noted = opt.rig != "sim";
  run.on_sample = [&](const Reading& r, double mah) {
    crash.OnSample();
    StopIfGuardianGone(watcher, run);
    // The simulated cell is recorded with the run (before its first sample),
    // so `resume --rig sim` can rebuild it: see NoteSimCell.
    if (!sim_cell_noted) sim_cell_noted = NoteSimCell(**store, *plan, cell, sim_choice);
    if (r.t_s < next_report) return;
    next_report = r.t_s + opt.progress_s;
    std::cout << fmt::format("  {}  {:.3f} V  {:+.3f} A  {:.1f} °C  {:.1f} mAh\n", FormatHms(r.t_s), r.voltage_v,
                             r.current_a, r.temperature_c, mah)
              << std::flush;
  };
  std::cout << fmt::format("running '{}' on cell '{}' ({}), logging to {}\n", plan->name, cell, opt.rig, opt.db);
  // The lab copy: its own thread and connections, only ever reading the bench
  // file; a failure there is logged and retried, never stops the run.
  std::unique_ptr<lab::BackgroundSync> sync;
  if (!opt.sync_url.empty()) {
    sync = std::make_unique<lab::BackgroundSync>(opt.db, opt.sync_url, [](const std::string& m) { std::cerr << "kneepoint: " + m + "\n"; });
    sync->Start();
  }
  auto result = controller.Execute(*plan, run);
  if (!result.ok()) return Fail(result.status());
  NoteStopSignal(**store, *result);
  std::cout << fmt::format("run {} {}: {}\n", result->run_id, OutcomeName(result->outcome), result->reason);
  if (result->outcome != Outcome::kCompleted)
    std::cerr << fmt::format("kneepoint: run {} {}: {}\n", result->run_id, OutcomeName(result->outcome), result->reason);
  if (auto events = (*store)->LoadEvents(result->run_id); events.ok()) {
    for (const EventRow& e : *events)
      if (e.kind == "result" || e.kind == "pause" || e.kind == "resume")
        std::cout << fmt::format("  {} {}: {}\n", FormatHms(e.t_s), e.kind, e.message);
  }
  if (auto rep = BuildRunReport(**store, result->run_id); rep.ok()) {
    if (Status st = RecordVerdict(**store, *rep); !st.ok()) std::cerr << "kneepoint: verdict not recorded: " << st.message() << "\n";
    std::cout << RunReportText(*rep);
  }
  if (sync) sync->Stop(15.0);  // a last pass: the end of the run and its verdict
  return result->outcome == Outcome::kCompleted ? kExitOk : kExitFailure;
}

}  // namespace

void RegisterRun(CliRegistry& r) {
  static RunCmdOptions opt;
  opt = RunCmdOptions{};  // fresh defaults for each command line parsed
  CLI::App* c = r.Add("run", "Run a procedure file on a rig, logging into a database", [] { return RunRun(opt); });
  c->add_option("file", opt.file, "Procedure file")->required();
  c->add_option("--rig", opt.rig, "'sim' for the built-in simulator, or a rig file")->required();
  c->add_option("--db", opt.db, "Database to log into (created when missing)")->required();
  c->add_option("--cell", opt.cell, "Name of the cell under test (required on real rigs)");
  c->add_option("--speed", opt.speed, "Simulator only: simulated seconds per wall second (0: as fast as possible)")
      ->capture_default_str();
  c->add_option("--sim-cell", opt.sim_cell, "Simulator only: cell preset (li-ion, lifepo4, nimh, alkaline, li-mno2) or cell file")
      ->capture_default_str();
  c->add_option("--sim-seed", opt.sim_seed, "Simulator only: draw one cell of the preset's batch (0: the nominal cell)");
  c->add_option("--sim-soc", opt.sim_soc, "Simulator only: the cell's state of charge at the start, 40% or 0.4 (default: full)");
  c->add_option("--sim-age", opt.sim_age,
                "Simulator only: an aged cell, its capacity fade as 20% or 0.2 (resistance grows 2.5x as fast; up to 90%)");
  AddQuantityOption(c, "--sim-ambient", opt.sim_ambient_c, Dimension::kTemperature,
                    "Simulator only: ambient temperature (default: the preset's)", -60.0, 100.0);
  c->add_option("--trace", opt.trace, "Write every instrument exchange, timestamped, to this file");
  AddQuantityOption(c, "--progress", opt.progress_s, Dimension::kTime, "Run time between progress lines", 1e-3, 1e9);
  AddQuantityOption(c, "--link-grace", opt.link_grace_s, Dimension::kTime,
                    "How long an instrument may stay silent (load off, step held) before the run aborts; 0s: abort at once",
                    0.0, 3600.0);
  AddHangLimitOption(c, opt.hang_limit_s);
  AddRecordOptions(c, opt.record);
  c->add_option("--sync", opt.sync_url,
                "Also copy the run to this lab database (postgresql://...) while it goes on; failures are retried, never stop the run")
      ->check([](const std::string& v) { return pg::IsPostgresUrl(v) ? std::string() : std::string("give a postgresql://... URL"); });
  AddBenchRunOptions(c, opt.bench);
}

}  // namespace kp::cli
