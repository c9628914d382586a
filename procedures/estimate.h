// Plan estimates for `kneepoint check`: how long each step should take and how
// much charge it moves, from the cell's rated capacity alone (no cell model).
// Assumes the cell starts full (or at a stated state of charge) and a voltage
// end means "until empty" while discharging ("until full" while charging) — a
// rough guide, not a prediction.
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include "drivers/status.h"
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
  double start_soc = 1.0;  // state of charge assumed at the start (fraction of rated)
  // The step-by-step walk stopped early (too many step executions): each
  // step's figures were scaled to its passes, the counts of the repeats
  // around it multiplied (charge then ignores the cell running empty).
  bool extrapolated = false;
};

// `start_soc`: the cell's state of charge at the start, 0..1 of its rating.
PlanEstimate EstimatePlan(const Plan& plan, double start_soc = 1.0);

// A share as written on a command line: "40%" or a fraction "0.4" (0..100 %
// / 0..1). The error names `option` and what the share is (`what`).
Result<double> ParsePercentOrFraction(std::string_view text, std::string_view option, std::string_view what);
// A state of charge ("40%", "0.4").
inline Result<double> ParseStateOfCharge(std::string_view text, std::string_view option) {
  return ParsePercentOrFraction(text, option, "state of charge");
}

// Mean current a step draws (A, > 0 discharging) at the cell's nominal voltage;
// for pulse trains and duty cycles the time-weighted mean over one run cycle.
double MeanCurrentA(const Step& step, const CellSpec& cell);

// The expanded plan as text: header, safety limits, each step with its
// segments, loops, and the estimates.
std::string DescribePlan(const Plan& plan, const PlanEstimate& estimate);

}  // namespace kp
