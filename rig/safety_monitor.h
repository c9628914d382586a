// SafetyMonitor: checks every reading against the plan's absolute limits,
// independently of the step logic. Stateless and cheap; call it on every
// sample, including the open-circuit reading before the load is applied.
#pragma once

#include <string>

#include "procedures/engine.h"
#include "procedures/plan.h"

namespace kp {

struct SafetyVerdict {
  enum Action { kOk, kPause, kAbort } action = kOk;
  std::string reason;  // empty when kOk
  bool ok() const { return action == kOk; }
};

class SafetyMonitor {
 public:
  explicit SafetyMonitor(const SafetyLimits& limits) : limits_(limits) {}

  // `delivered_mah` is the net charge delivered since the run started.
  // kPause only for over-temperature with OverTempAction::kPause below hard_temp_c.
  SafetyVerdict Check(const Reading& r, double delivered_mah) const;
  // While paused for heat: true once the cell has cooled to resume_temp_c.
  bool CooledDown(const Reading& r) const { return r.temperature_c <= limits_.resume_temp_c; }

 private:
  SafetyLimits limits_;
};

// The usual cautions for lithium cells, shown by every face that starts a
// run (the command line at start-up, the panel, the report's footer notes).
const char* SafetyCautions();

}  // namespace kp
