// `run FILE --rig BENCH.toml --slots A1,A2,... [--serials ...] [--batch NAME]`:
// several channels of a multi-channel bench at once, one process, one run
// record each (rig/bench_run.h). Signals stop the whole bench; `abort RUN`
// stops one channel. A guardian process switches this runner's channels off if
// it dies any other way.
#include <fmt/format.h>

#include <algorithm>
#include <iostream>
#include <map>
#include <mutex>

#include "analysis/duration_format.h"
#include "procedures/estimate.h"
#include "rig/bench_run.h"
#include "rig/load_guards.h"
#include "rig/rig_file.h"
#include "rig/safety_monitor.h"
#include "ui/cli/cli.h"
#include "ui/cli/procedure_file.h"
#include "ui/cli/run_bench_cmd.h"
#include "ui/cli/run_guard.h"
#include "ui/report/batch_report.h"
#include "ui/report/run_report.h"

namespace kp::cli {

void AddBenchRunOptions(CLI::App* c, BenchRunArgs& a) {
  c->add_option("--slot", a.slot, "Multi-channel rig file: run on this channel (slot) only");
  c->add_option("--slots", a.slots, "Multi-channel rig file: run on these channels at once (A1,A2 or A3=other.kpp)")->delimiter(',');
  c->add_option("--serials", a.serials, "With --slots: the cells' serials, in the same order")->delimiter(',');
  c->add_option("--batch", a.batch, "With --slots: the batch's name (tag batch=NAME; `report --batch NAME`)");
}

std::string SlotTag(const std::string& slot) { return "slot=" + slot; }
std::string BatchTag(const std::string& batch) { return "batch=" + batch; }

namespace {
std::string TagValue(const std::vector<std::string>& tags, const std::string& prefix) {
  for (const std::string& t : tags)
    if (t.rfind(prefix, 0) == 0) return t.substr(prefix.size());
  return "";
}
}  // namespace

std::string SlotOfRun(const std::vector<std::string>& tags) { return TagValue(tags, "slot="); }
std::string BatchOfRun(const std::vector<std::string>& tags) { return TagValue(tags, "batch="); }

int RunBenchCommand(const std::string& file, const std::string& rig, const std::string& db, const std::string& trace, double link_grace_s,
                    double hang_limit_s, double progress_s, const RecordOptions& record, const BenchRunArgs& args) {
  const std::atomic<bool>* stop = InstallStopSignals();
  if (!args.slot.empty()) return Fail(InvalidInput("--slot and --slots: give one or the other"));
  if (!rig.ends_with(".toml")) return Fail(InvalidInput(fmt::format("--slots needs a multi-channel rig file (.toml), not '{}'", rig)));
  if (!args.serials.empty() && args.serials.size() != args.slots.size())
    return Fail(InvalidInput(fmt::format("--serials names {} cells for {} slots", args.serials.size(), args.slots.size())));
  auto spec = LoadRigFile(rig);
  if (!spec.ok()) return Fail(spec.status());
  if (spec->channels.empty()) return Fail(InvalidInput(fmt::format("{} declares no [[channel]] tables; --slots needs them", rig)));
  // Slot -> procedure file.
  std::vector<std::pair<std::string, std::string>> wanted;
  for (const std::string& item : args.slots) {
    size_t eq = item.find('=');
    std::string slot = item.substr(0, eq), proc = eq == std::string::npos ? file : item.substr(eq + 1);
    if (slot.empty() || proc.empty()) return Fail(InvalidInput(fmt::format("--slots: '{}' is not SLOT or SLOT=PROCEDURE", item)));
    wanted.emplace_back(slot, proc);
  }
  std::vector<std::string> slot_names;
  for (const auto& [slot, proc] : wanted) {
    bool known = false;
    for (const ChannelSpec& c : spec->channels) known = known || c.slot == slot;
    if (!known) {
      std::string all;
      for (const ChannelSpec& c : spec->channels) all += (all.empty() ? "" : ", ") + c.slot;
      return Fail(InvalidInput(fmt::format("--slots: {} has no slot '{}' (slots: {})", rig, slot, all)));
    }
    slot_names.push_back(slot);
  }
  // The guardian first (it forks; the database is not open yet).
  double longest = 0.0;
  for (const auto& [slot, proc] : wanted)
    if (auto draft = LoadProcedure(proc); draft.ok()) longest = std::max(longest, LongestSamplePeriodS(*draft));
  auto guardian = StartGuardianFor(rig, db, link_grace_s, hang_limit_s, longest, 0, slot_names);
  if (!guardian.ok()) return Fail(guardian.status());

  BenchOpenOptions bo;
  bo.rig.trace_path = trace;
  auto bench = OpenChannelBench(*spec, bo);
  if (!bench.ok()) return Fail(bench.status());
  RigLimits limits;
  if (spec->limits.max_current_a > 0) limits.max_current_a = spec->limits.max_current_a;
  if (spec->limits.max_voltage_v > 0) limits.max_voltage_v = spec->limits.max_voltage_v;
  if (spec->limits.load_rating_w > 0) limits.max_power_w = spec->limits.load_rating_w;
  std::map<std::string, Plan> plans;  // by procedure file
  std::vector<ChannelJob> jobs;
  for (size_t k = 0; k < wanted.size(); ++k) {
    const auto& [slot, proc] = wanted[k];
    int index = (*bench)->Find(slot);
    RigLimits l = limits;
    l.has_supply = (*bench)->channel(index).roles.supply != nullptr;
    if (!plans.count(proc + (l.has_supply ? "+s" : ""))) {
      auto plan = LoadProcedure(proc, l);
      if (!plan.ok()) {
        std::cerr << plan.status().message() << "\n";
        return ExitCodeFor(plan.status());
      }
      for (const std::string& w : plan->warnings) std::cerr << proc << ":" << w.substr(5) << " (warning)\n";
      plans.emplace(proc + (l.has_supply ? "+s" : ""), std::move(*plan));
    }
    ChannelJob job;
    job.channel = index;
    job.plan = &plans.at(proc + (l.has_supply ? "+s" : ""));
    std::string serial = args.serials.empty() ? "" : args.serials[k];
    job.options.cell_name = serial.empty() ? fmt::format("{}-{}", spec->name, slot) : serial;
    if (Status st = FillRecord(record, job.options.record); !st.ok()) return Fail(st);
    if (!serial.empty()) job.options.record.cell_serial = serial;
    job.options.record.tags.push_back(SlotTag(slot));
    if (!args.batch.empty()) job.options.record.tags.push_back(BatchTag(args.batch));
    job.options.link_grace_s = link_grace_s;
    RigRoles& roles = (*bench)->channel(index).roles;
    roles.load->EnableWatchdog(spec->clock_speed);
    if (std::string warn = MissingGuardsWarning(*roles.load); !warn.empty() && k == 0) std::cerr << "kneepoint: " << warn << "\n";
    jobs.push_back(std::move(job));
  }
  std::cout << SafetyCautions() << "\n";
  for (const ChannelJob& j : jobs)
    std::cout << fmt::format("slot {}: '{}' on cell '{}'\n", (*bench)->channel(j.channel).slot, j.plan->name, j.options.cell_name);
  BenchRunOptions opt;
  opt.db_path = db;
  opt.stop = stop;
  opt.holder = fmt::format("a bench run of {} slots into {}", jobs.size(), db);
  std::mutex print_mu;
  std::vector<double> next_report(jobs.size(), 0.0);
  std::vector<std::string> job_slot;  // RunBench takes the jobs; the progress lines keep their slots
  for (const ChannelJob& j : jobs) job_slot.push_back((*bench)->channel(j.channel).slot);
  Guardian* watcher = guardian->get();
  RunOptions guardian_probe;  // StopIfGuardianGone's reason lands in the bench's stop
  CrashInjection crash = CrashInjectionFromEnv();  // counts the readings of every channel
  opt.on_sample = [&](int job, const Reading& r, double mah) {
    std::lock_guard<std::mutex> lk(print_mu);
    crash.OnSample();
    StopIfGuardianGone(watcher, guardian_probe);
    if (r.t_s < next_report[static_cast<size_t>(job)]) return;
    next_report[static_cast<size_t>(job)] = r.t_s + progress_s;
    std::cout << fmt::format("  {:<6} {}  {:.3f} V  {:+.3f} A  {:.1f} °C  {:.1f} mAh\n", job_slot[static_cast<size_t>(job)],
                             FormatHms(r.t_s), r.voltage_v, r.current_a, r.temperature_c, mah)
              << std::flush;
  };
  auto outcomes = RunBench(**bench, std::move(jobs), opt);
  if (!outcomes.ok()) return Fail(outcomes.status());
  SteadyClock wall;
  auto store = Store::Open(db, wall);
  if (!store.ok()) return Fail(store.status());
  bool all_completed = true, left_on = false;
  std::vector<int64_t> ids;
  for (const ChannelOutcome& o : *outcomes) {
    if (!o.status.ok()) {
      std::cerr << fmt::format("kneepoint: slot {}: {}\n", o.slot, o.status.message());
      all_completed = false;
      continue;
    }
    ids.push_back(o.result.run_id);
    std::cout << fmt::format("slot {}: run {} {}: {}\n", o.slot, o.result.run_id, OutcomeName(o.result.outcome), o.result.reason);
    if (o.result.outcome != Outcome::kCompleted) all_completed = false;
    if (!o.left_on.empty()) {
      left_on = true;
      std::cerr << fmt::format("kneepoint: slot {}: {} STILL ON after the run: SWITCH IT OFF BY HAND\n", o.slot, o.left_on);
    }
    if (auto rep = BuildRunReport(**store, o.result.run_id); rep.ok())
      if (Status st = RecordVerdict(**store, *rep); !st.ok()) std::cerr << "kneepoint: verdict not recorded: " << st.message() << "\n";
  }
  if (!args.batch.empty()) {
    if (auto rep = BuildBatchReport(**store, args.batch); rep.ok()) std::cout << BatchReportText(*rep);
  }
  if (left_on) return kExitFailure;
  return all_completed ? kExitOk : kExitFailure;
}

}  // namespace kp::cli
