// Resuming an interrupted run (`kneepoint resume RUN`).
//
// The procedure is rebuilt from the text stored with the run (never from a
// file that may have changed since), the cell is re-checked with the load off,
// and RunController continues the interrupted step from the engine snapshot
// committed with the last samples, carrying over the charge and energy
// delivered so far and logging the gap as an event.
//
// Usage:
//   KP_ASSIGN_OR_RETURN(Plan plan, ResumablePlan(store, run_id, RebuildBuiltInPlan));
//   KP_ASSIGN_OR_RETURN(ResumePoint point, PrepareResume(store, run_id, plan, roles));
//   options.resume = &point;  controller.Execute(plan, options);
#pragma once

#include <cstdint>
#include <functional>
#include <string>

#include "procedures/plan.h"
#include "rig/run_controller.h"
#include "rig/store.h"

namespace kp {

// Rebuilds the Plan a run executed from its stored row (procedure_text).
using PlanRebuilder = std::function<Result<Plan>(const RunRow&)>;

// Rebuilder for the built-in plans ("rated-capacity-0.2C"): reads the cell
// figures back from the stored text and checks that the rebuilt plan's text is
// identical, so a plan whose built-in definition changed is refused.
Result<Plan> RebuildBuiltInPlan(const RunRow& run);

// Rebuilder for every run: built-in plans as above, procedure files by
// compiling the stored text again (so `resume` never reads a file that may
// have changed since the run started).
Result<Plan> RebuildStoredPlan(const RunRow& run);

// The run's plan via `rebuild`, refusing when it cannot be rebuilt exactly or
// when `expected_text` (a procedure file the operator named) differs from the
// stored text.
Result<Plan> ResumablePlan(Store& store, int64_t run_id, const PlanRebuilder& rebuild,
                           const std::string* expected_text = nullptr);

// What RunController needs to continue a run; built by PrepareResume.
struct ResumePoint {
  int64_t run_id = 0;
  std::string checks;  // what was verified on the cell, for the gap event
};

// Checks that `run_id` is interrupted with a usable snapshot for `plan`,
// switches the load off and re-reads the cell's voltage and temperature: refuses
// (kInvalidInput / kLimitExceeded, message says why) when the voltage is at or
// below the cutoff or the step's end voltage, or outside the plan's limits, or
// the cell is too hot. Leaves the database unchanged.
Result<ResumePoint> PrepareResume(Store& store, int64_t run_id, const Plan& plan, RigRoles roles);

}  // namespace kp
