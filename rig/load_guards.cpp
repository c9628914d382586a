#include "rig/load_guards.h"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <limits>

namespace kp {

std::vector<GuardSetting> GuardSettingsFor(const Plan& plan, double watchdog_scale) {
  std::vector<GuardSetting> out;
  const SafetyLimits& l = plan.limits;
  // Under-voltage: below the lowest voltage the procedure itself stops at.
  double lowest = l.min_voltage_v > 0 ? l.min_voltage_v : std::numeric_limits<double>::infinity();
  double longest_period_s = 0.0;
  for (const Step& s : plan.steps) {
    if (s.end.voltage_below_v && *s.end.voltage_below_v > 0) lowest = std::min(lowest, *s.end.voltage_below_v);
    longest_period_s = std::max(longest_period_s, s.sample_period_s);
  }
  for (const Loop& lp : plan.loops)
    if (lp.until.voltage_below_v && *lp.until.voltage_below_v > 0) lowest = std::min(lowest, *lp.until.voltage_below_v);
  GuardSetting uv{LoadGuard::kUnderVoltage, std::nullopt, ""};
  if (std::isfinite(lowest) && lowest - kLoadGuardMarginV > 0)
    uv.value = lowest - kLoadGuardMarginV;
  else
    uv.why_unset = "the procedure sets no min-voltage above " + fmt::format("{:.2f} V", kLoadGuardMarginV);
  out.push_back(uv);
  GuardSetting oc{LoadGuard::kOverCurrent, std::nullopt, ""};
  if (std::isfinite(l.max_current_a) && l.max_current_a > 0)
    oc.value = l.max_current_a * kLoadGuardHeadroom;
  else
    oc.why_unset = "the procedure sets no max-current";
  out.push_back(oc);
  GuardSetting op{LoadGuard::kOverPower, std::nullopt, ""};
  if (oc.value && std::isfinite(l.max_voltage_v) && l.max_voltage_v > 0)
    op.value = l.max_current_a * l.max_voltage_v * kLoadGuardHeadroom;
  else
    op.why_unset = "the procedure sets no max-current or max-voltage";
  out.push_back(op);
  GuardSetting wd{LoadGuard::kWatchdog, std::nullopt, ""};
  if (watchdog_scale > 0)
    wd.value = std::max(kWatchdogMinS * watchdog_scale, kWatchdogPeriods * longest_period_s);
  else
    wd.why_unset = "not used: the simulated load lives in this process";
  out.push_back(wd);
  return out;
}

GuardReport ArmLoadGuards(LoadDriver& load, const Plan& plan) {
  GuardReport rep;
  for (const GuardSetting& g : GuardSettingsFor(plan, load.watchdog_scale())) {
    const char* name = LoadGuardName(g.guard);
    const char* unit = LoadGuardUnit(g.guard);
    if (!load.HasGuard(g.guard)) {
      rep.missing.push_back(fmt::format("the load has no {} protection (acknowledged in the rig file)", name));
      continue;
    }
    if (g.guard == LoadGuard::kWatchdog && load.watchdog_scale() <= 0) {
      rep.armed.push_back(fmt::format("{} {}", name, g.why_unset));
      continue;
    }
    if (!g.value) {
      rep.missing.push_back(fmt::format("{} protection not set: {}", name, g.why_unset));
      continue;
    }
    Status st = load.SetGuard(g.guard, *g.value);
    if (st.ok()) st = load.session().DrainErrors();
    if (!st.ok()) {
      rep.failure = fmt::format("could not set the load's {} protection to {:.3f} {}: {}", name, *g.value, unit, st.ToString());
      return rep;
    }
    Result<double> back = load.ReadGuard(g.guard);
    if (!back.ok()) {
      rep.failure = fmt::format("could not read back the load's {} protection: {}", name, back.status().ToString());
      return rep;
    }
    if (std::abs(*back - *g.value) > std::max(0.02 * std::abs(*g.value), 0.01)) {
      rep.failure = fmt::format("the load's {} protection reads back {:.3f} {}, not the {:.3f} {} set", name, *back, unit, *g.value, unit);
      return rep;
    }
    rep.armed.push_back(fmt::format("{} {:.3f} {} (read back {:.3f})", name, *g.value, unit, *back));
    rep.values.emplace_back(g.guard, *g.value);
  }
  return rep;
}

std::string MissingGuardsWarning(const LoadDriver& load) {
  std::string names;
  for (LoadGuard g : kLoadGuards)
    if (!load.HasGuard(g)) names += (names.empty() ? "" : ", ") + std::string(LoadGuardName(g));
  if (names.empty()) return {};
  return fmt::format("WARNING: the load has no hardware {} protection (acknowledged in the rig file's `unguarded`): "
                     "if this program dies, only the guardian process and your own fuse stand between the cell and abuse",
                     names);
}

}  // namespace kp
