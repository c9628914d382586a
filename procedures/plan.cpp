#include "procedures/plan.h"

#include <fmt/format.h>

namespace kp {

const char* StepKindName(StepKind kind) {
  switch (kind) {
    case StepKind::kRest: return "rest";
    case StepKind::kConstantCurrent: return "constant-current discharge";
  }
  return "?";
}

Plan RatedCapacityPlan(const CellSpec& cell, double sample_period_s) {
  Plan plan;
  plan.name = "rated-capacity-0.2C";
  plan.cell = cell;
  plan.limits.max_temp_c = cell.max_temp_c;
  plan.limits.max_voltage_v = cell.max_v + 0.05;
  plan.limits.min_voltage_v = cell.cutoff_v - 0.3;
  double current_a = cell.CRateToAmps(0.2);
  plan.limits.max_current_a = current_a * 1.5;
  // 0.2 It nominally takes 5 h; allow 7 h before calling the cell faulty.
  plan.limits.max_total_s = 7.0 * 3600.0;
  plan.limits.max_charge_mah = cell.rated_mah * 1.5;
  Step step;
  step.kind = StepKind::kConstantCurrent;
  step.label = fmt::format("discharge 0.2C ({:.0f} mA) to {:.2f} V", current_a * 1000.0, cell.cutoff_v);
  step.current_a = current_a;
  step.sample_period_s = sample_period_s;
  step.end.voltage_below_v = cell.cutoff_v;
  step.end.time_s = plan.limits.max_total_s;
  plan.steps.push_back(step);
  plan.source_text = fmt::format(
      "# built-in: rated-capacity check, 0.2 It to end voltage (IEC 61960-3 style)\n"
      "cell {} rated {:.0f} mAh cutoff {:.3f} V max-temp {:.1f} degC\n"
      "discharge {:.1f} mA until voltage <= {:.3f} V\n",
      cell.chemistry, cell.rated_mah, cell.cutoff_v, cell.max_temp_c, current_a * 1000.0, cell.cutoff_v);
  return plan;
}

}  // namespace kp
