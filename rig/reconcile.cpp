#include "rig/reconcile.h"

#include <fmt/format.h>

#include <cmath>

namespace kp {

bool SettingMatches(double commanded, double held) {
  return std::abs(commanded - held) <= std::max(0.01 * std::abs(commanded), 0.002);
}

template <typename T, typename F>
Result<std::optional<T>> StateReconciler::Try(Item item, const char* what, F&& read) {
  if (known_[item] == Known::kNo) return std::optional<T>();
  Result<T> r = read();
  if (known_[item] == Known::kYes) {
    // A read-back that answered before: an instrument error (its queue says
    // so) ends the run; a garbled or lost reply is asked again, as readings are.
    ScpiSession& session = item >= kSupplyOutput && supply_ != nullptr ? supply_->session() : load_.session();
    for (int again = 0; !r.ok() && again < 2; ++again) {
      if (Status queued = session.DrainErrors(); !queued.ok())
        return InstrumentError(r.status().message() + "; " + queued.message());
      if (r.status().code() != StatusCode::kProtocol && r.status().code() != StatusCode::kTimeout) break;
      r = read();
    }
  }
  if (r.ok()) {
    known_[item] = Known::kYes;
    return std::optional<T>(*r);
  }
  if (known_[item] == Known::kYes) return r.status();
  // Never answered: this instrument cannot read that back. Whatever it queued
  // about the unknown query is cleared so it does not show up later.
  known_[item] = Known::kNo;
  skipped_.push_back(fmt::format("{} not read back: {}", what, r.status().ToString()));
  return std::optional<T>();
}

Result<std::string> StateReconciler::Check(const CommandedState& c, bool with_guards) {
  std::string diff;
  auto add = [&](const std::string& s) { diff += (diff.empty() ? "" : "; ") + s; };
  const bool was_untried = known_[kInput] == Known::kUntried;
  KP_ASSIGN_OR_RETURN(std::optional<bool> on, Try<bool>(kInput, "load input state", [&] { return load_.InputState(); }));
  if (on && *on != c.load_on) add(fmt::format("load input is {} but the run commanded it {}", *on ? "ON" : "off", c.load_on ? "on" : "off"));
  if (c.load_on && c.mode) {
    KP_ASSIGN_OR_RETURN(std::optional<LoadMode> mode, Try<LoadMode>(kMode, "load mode", [&] { return load_.ReadMode(); }));
    if (mode && *mode != *c.mode)
      add(fmt::format("load is in {} mode but the run commanded {}", LoadModeName(*mode), LoadModeName(*c.mode)));
    if (!mode || *mode == *c.mode) {
      KP_ASSIGN_OR_RETURN(std::optional<double> level, Try<double>(kLevel, "load level", [&] { return load_.ReadLevel(*c.mode); }));
      if (level && !SettingMatches(c.level, *level))
        add(fmt::format("load level is {} but the run commanded {}", FormatNr3(*level), FormatNr3(c.level)));
    }
  }
  if (with_guards) {
    for (const auto& [g, value] : c.guards) {
      const Item item = static_cast<Item>(kGuardBase + static_cast<int>(g));
      KP_ASSIGN_OR_RETURN(std::optional<double> held,
                          Try<double>(item, LoadGuardName(g), [&, g = g] { return load_.ReadGuard(g); }));
      if (held && std::abs(*held - value) > std::max(0.02 * std::abs(value), 0.01))
        add(fmt::format("load {} protection is {} {} but the run set {}", LoadGuardName(g), FormatNr3(*held), LoadGuardUnit(g),
                        FormatNr3(value)));
    }
  }
  if (supply_ != nullptr) {
    KP_ASSIGN_OR_RETURN(std::optional<bool> out, Try<bool>(kSupplyOutput, "supply output state", [&] { return supply_->OutputState(); }));
    if (out && *out != c.supply_on)
      add(fmt::format("supply output is {} but the run commanded it {}", *out ? "ON" : "off", c.supply_on ? "on" : "off"));
    if (c.supply_on && c.supply_v && c.supply_a) {
      KP_ASSIGN_OR_RETURN(std::optional<double> v,
                          Try<double>(kSupplyVolts, "supply voltage setting", [&] { return supply_->ReadVoltageSetting(); }));
      if (v && !SettingMatches(*c.supply_v, *v)) add(fmt::format("supply voltage is set to {} V, the run commanded {} V", FormatNr3(*v), FormatNr3(*c.supply_v)));
      KP_ASSIGN_OR_RETURN(std::optional<double> a,
                          Try<double>(kSupplyAmps, "supply current limit", [&] { return supply_->ReadCurrentSetting(); }));
      if (a && !SettingMatches(*c.supply_a, *a)) add(fmt::format("supply current limit is {} A, the run commanded {} A", FormatNr3(*a), FormatNr3(*c.supply_a)));
    }
  }
  if (!skipped_.empty() || was_untried) {
    // Unknown queries leave entries in the error queues.
    (void)load_.session().Clear();
    if (supply_ != nullptr) (void)supply_->session().Clear();
  }
  return diff;
}

}  // namespace kp
