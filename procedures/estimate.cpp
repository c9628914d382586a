#include "procedures/estimate.h"

#include <fmt/format.h>

#include <algorithm>
#include <charconv>
#include <cmath>
#include <limits>

#include "procedures/units.h"

namespace kp {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr int kMaxExecutions = 100000;

double SegmentCurrentA(const Segment& g, const CellSpec& cell) {
  double v = cell.nominal_v > 0 ? cell.nominal_v : 1.0;
  switch (g.mode) {
    case LoadMode::kCurrent:
      return g.level;
    case LoadMode::kPower:
      return g.level / v;
    case LoadMode::kResistance:
      return v / g.level;
  }
  return 0.0;
}

std::string Hms(double s) {
  long t = std::lround(s);
  return fmt::format("{}:{:02}:{:02}", t / 3600, (t / 60) % 60, t % 60);
}

}  // namespace

double MeanCurrentA(const Step& step, const CellSpec& cell) {
  double v = cell.nominal_v > 0 ? cell.nominal_v : 1.0;
  switch (step.kind) {
    case StepKind::kRest:
    case StepKind::kChamberSet:
    case StepKind::kChamberSoak:
      return 0.0;
    case StepKind::kConstantCurrent:
      return step.current_a;
    case StepKind::kConstantPower:
      return step.power_w / v;
    case StepKind::kConstantResistance:
      return v / step.resistance_ohm;
    case StepKind::kCharge:
      return -step.charge_current_a;
    case StepKind::kPulseTrain:
    case StepKind::kDutyCycle:
    case StepKind::kResistanceTest: {
      double as = 0.0, s = 0.0;
      for (const Segment& g : step.segments) {
        as += SegmentCurrentA(g, cell) * g.duration_s;
        s += g.duration_s;
      }
      return s > 0 ? as / s : 0.0;
    }
  }
  return 0.0;
}

Result<double> ParsePercentOrFraction(std::string_view text, std::string_view option, std::string_view what) {
  ParsedQuantity q = ParseQuantityText(text, Dimension::kFraction, option);
  if (!q.value) return InvalidInput(fmt::format("{}: '{}' is not a {}: {} (write 40% or 0.4)", option, text, what, q.error));
  double v = *q.value;
  if (v < 0.0 || v > 1.0)
    return InvalidInput(fmt::format("{}: '{}' is outside 0..100 % (a plain number is a fraction 0..1: write 40% or 0.4)",
                                    option, text));
  return v;
}

PlanEstimate EstimatePlan(const Plan& plan, double start_soc) {
  PlanEstimate est;
  est.steps.resize(plan.steps.size());
  est.start_soc = std::clamp(start_soc, 0.0, 1.0);
  const double rated = plan.cell.rated_mah;
  double remaining = rated * est.start_soc;  // the cell's charge at the start
  struct LoopRun {
    int iter = 0;
    double start_s = 0, charge = 0;
  };
  std::vector<LoopRun> loops(plan.loops.size());
  double now = 0.0;
  int i = 0, executions = 0;
  auto enter = [&](int index) {
    for (size_t li = 0; li < plan.loops.size(); ++li)
      if (plan.loops[li].first_step == index && loops[li].iter == 0) loops[li] = LoopRun{0, now, 0.0};
  };
  enter(0);
  while (i < static_cast<int>(plan.steps.size())) {
    if (++executions > kMaxExecutions) {
      est.extrapolated = true;
      break;
    }
    const Step& s = plan.steps[static_cast<size_t>(i)];
    StepEstimate& se = est.steps[static_cast<size_t>(i)];
    double amps = MeanCurrentA(s, plan.cell);
    double ma = amps * 1000.0;
    double dur = kInf;
    if (s.kind == StepKind::kResistanceTest) dur = s.CycleSeconds();
    if (s.kind == StepKind::kChamberSet) dur = 0.0;
    if (s.kind == StepKind::kChamberSoak) dur = s.soak_max_s;  // at most (the lag decides)
    const EndConditions& e = s.end;
    if (e.time_s) dur = std::min(dur, *e.time_s);
    if (e.charge_mah && ma != 0) dur = std::min(dur, *e.charge_mah / std::abs(ma) * 3600.0);
    if (e.energy_wh && amps != 0) dur = std::min(dur, *e.energy_wh / std::abs(amps * plan.cell.nominal_v) * 3600.0);
    if (ma > 0 && e.voltage_below_v) dur = std::min(dur, remaining / ma * 3600.0);
    if (ma < 0 && (e.voltage_above_v || e.current_below_a)) {
      // Constant current to full, plus a constant-voltage tail while the
      // current tapers (about a fifth more; common practice, no source).
      double to_full = (rated - remaining) / -ma * 3600.0;
      dur = std::min(dur, e.current_below_a ? to_full * 1.2 + 60.0 : to_full);
    }
    bool known = std::isfinite(dur);
    if (!known) {
      dur = 0.0;
      se.known = false;
      est.complete = false;
    }
    double q = std::clamp(ma * dur / 3600.0, remaining - rated, remaining);
    remaining -= q;
    now += dur;
    se.executions++;
    se.duration_s += dur;
    se.charge_mah += q;
    est.total_s += dur;
    est.total_mah += q;
    for (size_t li = 0; li < plan.loops.size(); ++li)
      if (plan.loops[li].first_step <= i && i <= plan.loops[li].last_step) loops[li].charge += q;

    // Next step, as the engine does it (until-loops checked at step ends).
    int next = i + 1;
    bool exited = false;
    for (size_t li = 0; li < plan.loops.size() && !exited; ++li) {
      const Loop& l = plan.loops[li];
      if (l.count != 0 || i < l.first_step || i > l.last_step) continue;
      const EndConditions& u = l.until;
      bool done = (u.voltage_below_v && remaining <= rated * 1e-6) || (u.time_s && now - loops[li].start_s >= *u.time_s) ||
                  (u.charge_mah && std::abs(loops[li].charge) >= *u.charge_mah);
      if (!u.voltage_below_v && !u.time_s && !u.charge_mah && loops[li].iter >= kMaxRepeatPasses) {
        done = true;
        est.complete = false;
      }
      if (done) {
        loops[li] = LoopRun{};
        next = l.last_step + 1;
        exited = true;
      }
    }
    if (!exited) {
      for (size_t k = plan.loops.size(); k-- > 0;) {
        const Loop& l = plan.loops[k];
        if (l.last_step != i) continue;
        LoopRun& st = loops[k];
        ++st.iter;
        if (l.count == 0 || st.iter < l.count) {
          for (size_t inner = k + 1; inner < plan.loops.size(); ++inner)
            if (plan.loops[inner].first_step >= l.first_step && plan.loops[inner].last_step <= l.last_step)
              loops[inner] = LoopRun{};
          next = l.first_step;
          break;
        }
        st = LoopRun{};
      }
    }
    i = next;
    enter(i);
  }
  if (est.extrapolated) {
    // Nested repeats multiply: each step runs the product of the counts
    // around it (until-loops counted once), at the figures of the passes walked.
    est.total_s = est.total_mah = 0.0;
    for (size_t k = 0; k < plan.steps.size(); ++k) {
      StepEstimate& se = est.steps[k];
      int64_t passes = 1;
      for (const Loop& l : plan.loops)
        if (l.first_step <= static_cast<int>(k) && static_cast<int>(k) <= l.last_step) passes *= l.count > 0 ? l.count : 1;
      if (se.executions > 0 && passes > se.executions) {
        const double scale = static_cast<double>(passes) / se.executions;
        se.duration_s *= scale;
        se.charge_mah *= scale;
        se.executions = static_cast<int>(std::min<int64_t>(passes, std::numeric_limits<int>::max()));
      }
      est.total_s += se.duration_s;
      est.total_mah += se.charge_mah;
    }
  }
  return est;
}

std::string DescribePlan(const Plan& plan, const PlanEstimate& est) {
  const CellSpec& c = plan.cell;
  const SafetyLimits& l = plan.limits;
  std::string out =
      fmt::format("procedure '{}': {} cell, rated {:g} mAh, nominal {:g} V, max {:g} V, cutoff {:g} V, max {:g} °C\n",
                  plan.name, c.chemistry, c.rated_mah, c.nominal_v, c.max_v, c.cutoff_v, c.max_temp_c);
  out += fmt::format(
      "safety: temperature < {:g} °C ({}), voltage {:g} V .. {:g} V, current <= {}, time <= {}, charge <= {:g} mAh\n",
      l.max_temp_c,
      l.over_temp_action == OverTempAction::kPause
          ? fmt::format("pause, resume at {:g} °C, abort at {:g} °C", l.resume_temp_c, l.hard_temp_c)
          : std::string("abort"),
      l.min_voltage_v, l.max_voltage_v, FormatQuantity(l.max_current_a, Dimension::kCurrent), Hms(l.max_total_s),
      l.max_charge_mah);
  out += est.start_soc >= 1.0
             ? std::string("steps (estimates assume a full cell at the start; charge > 0 is discharged):\n")
             : fmt::format("steps (estimates assume the cell at {:g} % at the start; charge > 0 is discharged):\n",
                           est.start_soc * 100.0);
  for (size_t i = 0; i < plan.steps.size(); ++i) {
    for (const Loop& lp : plan.loops) {
      if (lp.first_step != static_cast<int>(i)) continue;
      if (lp.count > 0)
        out += fmt::format("  repeat {} times, steps {}-{} (line {})\n", lp.count, lp.first_step + 1, lp.last_step + 1,
                           lp.source_line);
      else
        out += fmt::format("  repeat until the loop's condition holds, steps {}-{} (line {})\n", lp.first_step + 1,
                           lp.last_step + 1, lp.source_line);
    }
    const Step& s = plan.steps[i];
    const StepEstimate& e = est.steps[i];
    std::string figures = e.executions == 0 ? "not reached"
                          : !e.known        ? "duration unknown (ends on a condition that cannot be estimated)"
                                            : fmt::format("~{} and {:+.1f} mAh{}", Hms(e.duration_s), e.charge_mah,
                                                   e.executions > 1 ? fmt::format(" over {} runs", e.executions) : "");
    out += fmt::format(
        "  {:>3}. [{}] {}  (line {}, sample every {}{})\n       {}\n", i + 1, StepKindName(s.kind), s.label, s.source_line,
        FormatQuantity(s.sample_period_s, Dimension::kTime),
        s.log_change_v ? fmt::format(", log on {} change", FormatQuantity(*s.log_change_v, Dimension::kVoltage)) : "", figures);
    for (const Segment& g : s.segments) {
      std::string level = g.mode == LoadMode::kCurrent ? FormatQuantity(g.level, Dimension::kCurrent)
                          : g.mode == LoadMode::kPower ? FormatQuantity(g.level, Dimension::kPower)
                                                       : FormatQuantity(g.level, Dimension::kResistance);
      out += fmt::format("         - {} {} for {}{}\n", g.name, level, FormatQuantity(g.duration_s, Dimension::kTime),
                         g.compressed()
                             ? fmt::format(" (compressed from {}, x{:.4g})", FormatQuantity(g.real_duration_s, Dimension::kTime),
                                           g.real_duration_s / g.duration_s)
                             : "");
    }
    if (s.kind == StepKind::kPulseTrain || s.kind == StepKind::kDutyCycle) {
      Step real = s;
      bool compressed = false;
      for (Segment& g : real.segments) {
        compressed = compressed || g.compressed();
        g.duration_s = g.real_duration_s;
      }
      out += fmt::format(
          "         mean current {}{}\n", FormatQuantity(MeanCurrentA(s, c), Dimension::kCurrent),
          compressed ? fmt::format(" as run; {} at real timing", FormatQuantity(MeanCurrentA(real, c), Dimension::kCurrent))
                     : "");
    }
  }
  out += fmt::format("estimated total: {}{}, {:+.1f} mAh net{}\n", Hms(est.total_s),
                     est.complete ? "" : " or more (some ends unknown)", est.total_mah,
                     est.extrapolated ? " (extrapolated: nested repeat counts multiplied)" : "");
  return out;
}

}  // namespace kp
