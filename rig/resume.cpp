#include "rig/resume.h"

#include "procedures/procedure_parser.h"

#include <fmt/format.h>

#include <cstdlib>
#include <map>
#include <sstream>

#include "procedures/engine.h"

namespace kp {
namespace {

// Reads "key value" and "key=value" pairs (numbers may carry a unit suffix,
// "2500mAh") from the `cell ...` line of a built-in plan's text.
std::map<std::string, double> CellFigures(const std::string& text, std::string* chemistry) {
  std::map<std::string, double> out;
  std::istringstream lines(text);
  std::string line;
  while (std::getline(lines, line)) {
    if (line.rfind("cell ", 0) != 0) continue;
    for (char& c : line)
      if (c == '=') c = ' ';
    std::istringstream words(line);
    std::string w, key;
    words >> w >> *chemistry;
    while (words >> w) {
      char* end = nullptr;
      double v = std::strtod(w.c_str(), &end);
      if (end != w.c_str() && !key.empty()) {
        out[key] = v;
        key.clear();
      } else if (end == w.c_str()) {
        key = w;
      }
    }
    break;
  }
  return out;
}

}  // namespace

Result<Plan> RebuildBuiltInPlan(const RunRow& run) {
  if (run.procedure_name != "rated-capacity-0.2C") {
    return InvalidInput(fmt::format("run {} used procedure '{}', which this kneepoint cannot rebuild from its stored text",
                                    run.id, run.procedure_name));
  }
  CellSpec cell;
  auto f = CellFigures(run.procedure_text, &cell.chemistry);
  if (!f.count("rated") || !f.count("cutoff") || !f.count("max-temp"))
    return InvalidInput(fmt::format("run {}: the stored procedure text has no readable cell line", run.id));
  cell.rated_mah = f["rated"];
  cell.cutoff_v = f["cutoff"];
  cell.max_temp_c = f["max-temp"];
  cell.nominal_v = f.count("nominal") ? f["nominal"] : 0.0;
  if (f.count("max")) {
    cell.max_v = f["max"];
  } else if (cell.chemistry == "li-ion") {
    cell.max_v = 4.2;  // older texts omit it; the usual li-ion charge voltage (common practice, no source)
  } else {
    return InvalidInput(fmt::format("run {}: the stored procedure text gives no maximum voltage", run.id));
  }
  Plan plan = RatedCapacityPlan(cell);
  if (plan.source_text != run.procedure_text) {
    return InvalidInput(
        fmt::format("run {}: procedure changed — the built-in '{}' no longer produces the text stored with the run; "
                    "resuming would run a different procedure",
                    run.id, run.procedure_name));
  }
  return plan;
}

Result<Plan> ResumablePlan(Store& store, int64_t run_id, const PlanRebuilder& rebuild, const std::string* expected_text) {
  KP_ASSIGN_OR_RETURN(RunRow run, store.GetRun(run_id));
  if (expected_text != nullptr && *expected_text != run.procedure_text) {
    return InvalidInput(
        fmt::format("procedure changed: the file given differs from the procedure stored with run {}; resume "
                    "continues the stored one only (omit the file, or start a new run)",
                    run_id));
  }
  KP_ASSIGN_OR_RETURN(Plan plan, rebuild(run));
  if (plan.source_text != run.procedure_text)
    return InvalidInput(
        fmt::format("procedure changed: the rebuilt plan's text differs from the one stored with run {}", run_id));
  return plan;
}

Result<ResumePoint> PrepareResume(Store& store, int64_t run_id, const Plan& plan, RigRoles roles) {
  if (roles.load == nullptr || roles.thermometer == nullptr)
    return InvalidInput("a run needs a load and a thermometer in the rig");
  KP_RETURN_IF_ERROR(store.ReconcileOrphans().status());
  KP_ASSIGN_OR_RETURN(RunRow run, store.GetRun(run_id));
  if (run.outcome != Outcome::kInterrupted) {
    return InvalidInput(fmt::format("run {} is {}{}; only an interrupted run can be resumed", run_id, OutcomeName(run.outcome),
                                    run.outcome == Outcome::kRunning ? " (its runner is still alive)" : ""));
  }
  KP_ASSIGN_OR_RETURN(auto progress, store.LoadProgress(run_id));
  if (!progress)
    return InvalidInput(fmt::format("run {} stopped before its first commit; nothing to resume — start a new run", run_id));
  StepEngine probe(plan);
  KP_RETURN_IF_ERROR(probe.Restore(progress->engine_snapshot, progress->t_s)
                         .status()
                         .WithContext(fmt::format("run {} cannot continue with this procedure", run_id)));

  // The cell as it is now, with no load.
  KP_RETURN_IF_ERROR(roles.load->SetInput(false).WithContext("switching the load off before checking the cell"));
  KP_ASSIGN_OR_RETURN(double volts, roles.meter != nullptr ? roles.meter->MeasureVoltage() : roles.load->MeasureVoltage());
  KP_ASSIGN_OR_RETURN(double temp_c, roles.thermometer->MeasureTemperature());
  const SafetyLimits& lim = plan.limits;
  if (temp_c >= lim.max_temp_c)
    return LimitExceeded(
        fmt::format("cannot resume run {}: cell at {:.1f} °C, limit {:.1f} °C; let it cool", run_id, temp_c, lim.max_temp_c));
  if (volts > lim.max_voltage_v)
    return LimitExceeded(fmt::format("cannot resume run {}: cell at {:.3f} V, above the limit {:.3f} V — is this the same cell?",
                                     run_id, volts, lim.max_voltage_v));
  if (volts < lim.min_voltage_v)
    return LimitExceeded(
        fmt::format("cannot resume run {}: cell at {:.3f} V, below the limit {:.3f} V", run_id, volts, lim.min_voltage_v));
  if (plan.cell.cutoff_v > 0 && volts <= plan.cell.cutoff_v)
    return LimitExceeded(fmt::format("cannot resume run {}: cell already at {:.3f} V, at or below the cutoff {:.3f} V", run_id,
                                     volts, plan.cell.cutoff_v));
  if (!probe.finished()) {
    const Step& step = plan.steps[static_cast<size_t>(probe.step_index())];
    if (step.end.voltage_below_v && volts <= *step.end.voltage_below_v)
      return LimitExceeded(fmt::format("cannot resume run {}: cell at {:.3f} V, at or below step {}'s end voltage {:.3f} V",
                                       run_id, volts, probe.step_index() + 1, *step.end.voltage_below_v));
  }
  ResumePoint point;
  point.run_id = run_id;
  point.checks = fmt::format("cell re-checked with the load off: {:.3f} V, {:.1f} °C", volts, temp_c);
  return point;
}

Result<Plan> RebuildStoredPlan(const RunRow& run) {
  if (run.procedure_name == RatedCapacityPlan(CellSpec{}).name) return RebuildBuiltInPlan(run);
  Result<Plan> plan = CompileProcedure(run.procedure_text, run.procedure_name);
  if (!plan.ok()) return plan.status().WithContext(fmt::format("run {}: the stored procedure no longer compiles", run.id));
  if (plan->name != run.procedure_name)
    return InvalidInput(fmt::format("run {}: the stored procedure compiles to '{}', not '{}'", run.id, plan->name, run.procedure_name));
  return plan;
}

}  // namespace kp
