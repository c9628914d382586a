// SafetyMonitor: checks every reading against the plan's absolute limits,
// independently of the step logic. A non-empty result means: stop now.
#pragma once

#include <optional>
#include <string>

#include "procedures/engine.h"
#include "procedures/plan.h"

namespace kp {

class SafetyMonitor {
 public:
  explicit SafetyMonitor(const SafetyLimits& limits) : limits_(limits) {}

  // `delivered_mah` is the charge delivered since the run started.
  std::optional<std::string> Check(const Reading& r, double delivered_mah) const;

 private:
  SafetyLimits limits_;
};

}  // namespace kp
