#include "procedures/plan.h"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>

namespace kp {

const char* StepKindName(StepKind kind) {
  switch (kind) {
    case StepKind::kRest:
      return "rest";
    case StepKind::kConstantCurrent:
      return "constant-current discharge";
    case StepKind::kConstantPower:
      return "constant-power discharge";
    case StepKind::kConstantResistance:
      return "constant-resistance discharge";
    case StepKind::kPulseTrain:
      return "pulse train";
    case StepKind::kDutyCycle:
      return "duty cycle";
    case StepKind::kResistanceTest:
      return "dc resistance";
    case StepKind::kCharge:
      return "charge";
    case StepKind::kChamberSet:
      return "chamber set point";
    case StepKind::kChamberSoak:
      return "chamber soak";
  }
  return "?";
}

bool IsDischargeKind(StepKind kind) { return kind != StepKind::kRest && kind != StepKind::kCharge && !IsChamberKind(kind); }

bool IsChamberKind(StepKind kind) { return kind == StepKind::kChamberSet || kind == StepKind::kChamberSoak; }

bool PlanUsesChamber(const Plan& plan) {
  return std::any_of(plan.steps.begin(), plan.steps.end(), [](const Step& s) { return IsChamberKind(s.kind); });
}

const char* StepModeName(const Step& s) {
  switch (s.kind) {
    case StepKind::kRest:
      return "off";
    case StepKind::kConstantCurrent:
      return "current";
    case StepKind::kConstantPower:
      return "power";
    case StepKind::kConstantResistance:
      return "resistance";
    case StepKind::kCharge:
      return "charge";
    case StepKind::kChamberSet:
    case StepKind::kChamberSoak:
      return "chamber";  // load off; the level is the chamber set point (degC)
    default:
      return "segments";
  }
}

std::optional<double> StepLevel(const Step& s) {
  switch (s.kind) {
    case StepKind::kConstantCurrent:
      return s.current_a;
    case StepKind::kConstantPower:
      return s.power_w;
    case StepKind::kConstantResistance:
      return s.resistance_ohm;
    case StepKind::kCharge:
      return s.charge_current_a;
    case StepKind::kRest:
      return 0.0;
    case StepKind::kChamberSet:
    case StepKind::kChamberSoak:
      return s.chamber_c;
    default:
      return std::nullopt;
  }
}

double Step::CycleSeconds() const {
  double s = 0.0;
  for (const Segment& g : segments) s += g.duration_s;
  return s;
}

double Step::RealSeconds(double elapsed_s) const {
  double cycle = CycleSeconds();
  if (cycle <= 0.0 || kind == StepKind::kResistanceTest) return elapsed_s;
  double real_cycle = 0.0;
  for (const Segment& g : segments) real_cycle += g.real_duration_s;
  double n = std::floor(elapsed_s / cycle);
  double real = n * real_cycle;
  double rest = elapsed_s - n * cycle;
  for (const Segment& g : segments) {
    double part = std::min(rest, g.duration_s);
    real += part * (g.real_duration_s / g.duration_s);
    rest -= part;
    if (rest <= 0.0) break;
  }
  return real;
}

std::vector<std::string> ApplyRigLimits(Plan& plan, const RigLimits& rig) {
  std::vector<std::string> problems;
  SafetyLimits& l = plan.limits;
  l.max_current_a = std::min(l.max_current_a, rig.max_current_a);
  l.max_voltage_v = std::min(l.max_voltage_v, rig.max_voltage_v);
  l.max_temp_c = std::min(l.max_temp_c, rig.max_temp_c);
  l.hard_temp_c = std::min(l.hard_temp_c, rig.max_temp_c);
  plan.edge_settle_s = std::max(plan.edge_settle_s, rig.min_sample_period_s);
  if (rig.chamber_min_c) l.chamber_min_c = std::max(l.chamber_min_c.value_or(*rig.chamber_min_c), *rig.chamber_min_c);
  if (rig.chamber_max_c) l.chamber_max_c = std::min(l.chamber_max_c.value_or(*rig.chamber_max_c), *rig.chamber_max_c);
  auto where = [](const Step& s) { return fmt::format("line {}: ", s.source_line); };
  for (Step& s : plan.steps) {
    if (s.sample_period_s < rig.min_sample_period_s) {
      problems.push_back(where(s) + fmt::format("sample period {:g} s is faster than the rig can read ({:g} s)",
                                                s.sample_period_s, rig.min_sample_period_s));
    }
    auto check_level = [&](LoadMode mode, double level, const std::string& what) {
      if (mode == LoadMode::kCurrent && level > rig.max_current_a)
        problems.push_back(where(s) +
                           fmt::format("{} asks {:g} A; the rig's load sinks at most {:g} A", what, level, rig.max_current_a));
      if (mode == LoadMode::kPower && level > rig.max_power_w)
        problems.push_back(where(s) +
                           fmt::format("{} asks {:g} W; the rig's load takes at most {:g} W", what, level, rig.max_power_w));
    };
    switch (s.kind) {
      case StepKind::kConstantCurrent:
        check_level(LoadMode::kCurrent, s.current_a, "the discharge");
        break;
      case StepKind::kConstantPower:
        check_level(LoadMode::kPower, s.power_w, "the discharge");
        break;
      case StepKind::kCharge:
        if (!rig.has_supply) problems.push_back(where(s) + "a charge step needs a supply, and this rig has none");
        if (s.charge_voltage_v > rig.max_voltage_v)
          problems.push_back(where(s) +
                             fmt::format("charge to {:g} V exceeds the rig's {:g} V", s.charge_voltage_v, rig.max_voltage_v));
        break;
      case StepKind::kChamberSet:
      case StepKind::kChamberSoak:
        if (!rig.has_chamber) {
          problems.push_back(where(s) + "this step needs a temperature chamber, and this rig has none");
        } else if (s.kind == StepKind::kChamberSet) {
          if (rig.chamber_min_c && s.chamber_c < *rig.chamber_min_c)
            problems.push_back(where(s) + fmt::format("chamber set point {:g} degC is below the rig's chamber limit {:g} degC",
                                                      s.chamber_c, *rig.chamber_min_c));
          if (rig.chamber_max_c && s.chamber_c > *rig.chamber_max_c)
            problems.push_back(where(s) + fmt::format("chamber set point {:g} degC is above the rig's chamber limit {:g} degC",
                                                      s.chamber_c, *rig.chamber_max_c));
        }
        break;
      default:
        break;
    }
    for (const Segment& g : s.segments) {
      check_level(g.mode, g.level, "segment '" + g.name + "'");
      // A reading just after the edge and one just before the next need two
      // full reading times inside the segment.
      if (g.duration_s < 2.0 * rig.min_sample_period_s)
        problems.push_back(where(s) +
                           fmt::format("segment '{}' lasts {:g} s, shorter than two readings of this rig ({:g} s each); "
                                       "it could not be sampled",
                                       g.name, g.duration_s, rig.min_sample_period_s));
    }
  }
  return problems;
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
      "cell {} rated={:.0f}mAh nominal={:.3f}V max={:.3f}V cutoff={:.3f}V max-temp={:.1f}degC\n"
      "discharge 0.2C until voltage<={:.3f}V\n",
      cell.chemistry, cell.rated_mah, cell.nominal_v, cell.max_v, cell.cutoff_v, cell.max_temp_c, cell.cutoff_v);
  return plan;
}

namespace {
// Loops are stored outer first: of two with the same span the later is inside.
int64_t PassesAt(const std::vector<Loop>& loops, size_t k) {
  const Loop& l = loops[k];
  int64_t inner = 1;
  for (size_t j = 0; j < loops.size(); ++j) {
    const Loop& o = loops[j];
    if (j == k || o.first_step < l.first_step || o.last_step > l.last_step) continue;
    const bool same_span = o.first_step == l.first_step && o.last_step == l.last_step;
    if (same_span && j < k) continue;
    inner = std::max(inner, PassesAt(loops, j));
  }
  const int64_t mine = l.count > 0 ? l.count : 1;
  return mine * std::min(inner, kMaxRepeatPasses + 1);
}
}  // namespace

int64_t NestedPasses(const std::vector<Loop>& loops, const Loop& l) {
  for (size_t k = 0; k < loops.size(); ++k)
    if (&loops[k] == &l) return PassesAt(loops, k);
  // Not one of `loops` (a loop being closed): everything inside its span.
  std::vector<Loop> with = loops;
  with.insert(with.begin(), l);
  return PassesAt(with, 0);
}

}  // namespace kp
