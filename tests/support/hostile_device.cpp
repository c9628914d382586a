#include "tests/support/hostile_device.h"

#include <gtest/gtest.h>

namespace kp::testing {

std::optional<std::string> HostileDevice::HandleLine(std::string_view line) {
  const bool query = line.find('?') != std::string_view::npos;
  std::optional<std::string> reply;
  if (ignore && ignore(line)) {
    reply = std::nullopt;
  } else {
    reply = inner_.HandleLine(line);
  }
  if (query) {
    ++queries;
    if (reply && replace_when && replace_when(line)) reply = reply_text;
    if (reply && (twice_always || queries == twice_at)) reply = *reply + "\n" + *reply;
    if (reply && queries == late_at) {
      late_ = *reply;
      reply = std::nullopt;
    }
  }
  if (!late_.empty() && !(query && queries == late_at)) {
    std::string out = late_ + (reply ? "\n" + *reply : std::string());
    late_.clear();
    return out;
  }
  return reply;
}

RunResult HostileRig::Run(const Plan& plan, RunOptions o) {
  RigRoles roles;
  roles.load = &load;
  roles.meter = &meter;
  roles.thermometer = &thermo;
  roles.description = "hostile sim";
  RunController rc(*f.store, f.clock, roles);
  o.cell_name = "H1";
  auto r = rc.Execute(plan, o);
  EXPECT_TRUE(r.ok()) << r.status().ToString();
  return r.ok() ? *r : RunResult{};
}

bool HostileRig::HasEvent(int64_t run, const std::string& kind, const std::string& text) {
  auto events = f.store->LoadEvents(run);
  if (!events.ok()) return false;
  for (const EventRow& e : *events)
    if (e.kind == kind && e.message.find(text) != std::string::npos) return true;
  return false;
}

}  // namespace kp::testing
