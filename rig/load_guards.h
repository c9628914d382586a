// Load guards: the electronic load's own protections, armed at the start of
// every run from the procedure's limits and read back, so that the cell stays
// protected by the instrument itself when the controller is gone (killed,
// crashed, hung, unplugged).
//
//   undervoltage  LoadGuardMarginV below the lowest of the procedure's
//                 min-voltage and every step's `voltage<=` cutoff: never above
//                 a cutoff, so it only acts when the software did not
//   overcurrent   the procedure's max-current times LoadGuardHeadroom
//   overpower     max-current times max-voltage times LoadGuardHeadroom
//   watchdog      input off when no command reached the load for the longer of
//                 kWatchdogMinS wall seconds and kWatchdogPeriods sample
//                 periods (the run queries the load every sample period while
//                 its input is on); only on loads reached over a link
//                 (LoadDriver::EnableWatchdog), in the instrument's seconds
#pragma once

#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "drivers/roles.h"
#include "procedures/plan.h"

namespace kp {

inline constexpr double kLoadGuardMarginV = 0.05;
inline constexpr double kLoadGuardHeadroom = 1.1;
inline constexpr double kWatchdogMinS = 60.0;
inline constexpr double kWatchdogPeriods = 4.0;

struct GuardSetting {
  LoadGuard guard = LoadGuard::kUnderVoltage;
  std::optional<double> value;  // empty: the plan gives nothing to set it from
  std::string why_unset;
};

// What each guard should be set to for `plan`. `watchdog_scale`: the
// instrument's seconds per wall second (LoadDriver::watchdog_scale); 0 leaves
// the watchdog unset.
std::vector<GuardSetting> GuardSettingsFor(const Plan& plan, double watchdog_scale = 1.0);

struct GuardReport {
  std::vector<std::string> armed;    // "undervoltage 2.400 V (read back 2.400 V)"
  std::vector<std::string> missing;  // warnings: guards the load lacks or the plan cannot set
  std::string failure;               // not empty: a guard did not take; the run must not start
  std::vector<std::pair<LoadGuard, double>> values;  // what each armed guard was set to (read back later)
};

// Sets every guard the load has, reads each back (within 2 % or 0.01 of its
// unit) and checks the load's error queue. Guards the load lacks are listed
// in `missing` (rig files acknowledge them in `unguarded`).
GuardReport ArmLoadGuards(LoadDriver& load, const Plan& plan);

// One line for a warning printed by `run` at start: empty when the load has
// every guard.
std::string MissingGuardsWarning(const LoadDriver& load);

}  // namespace kp
