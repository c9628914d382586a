// Plan estimates for `kneepoint check`: how long each step should take and how
// much charge it moves, from the cell's rated capacity alone (no cell model).
// Assumes the cell starts full and a voltage end means "until empty" while
// discharging ("until full" while charging) — a rough guide, not a prediction.
#pragma once

#include <string>
#include <vector>

#include "procedures/plan.h"

namespace kp {

struct StepEstimate {
  int executions = 0;       // how many times the step runs (loops)
  double duration_s = 0.0;  // summed over executions
  double charge_mah = 0.0;  // net, > 0 discharged; summed over executions
  bool known = true;        // false when an end could not be estimated (temperature...)
};

struct PlanEstimate {
  std::vector<StepEstimate> steps;  // one per Plan step
  double total_s = 0.0;
  double total_mah = 0.0;
  bool complete = true;  // false when some step or loop could not be estimated
};

PlanEstimate EstimatePlan(const Plan& plan);

// Mean current a step draws (A, > 0 discharging) at the cell's nominal voltage;
// for pulse trains and duty cycles the time-weighted mean over one run cycle.
double MeanCurrentA(const Step& step, const CellSpec& cell);

// The expanded plan as text: header, safety limits, each step with its
// segments, loops, and the estimates.
std::string DescribePlan(const Plan& plan, const PlanEstimate& estimate);

}  // namespace kp
