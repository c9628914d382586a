// Product-life projection from a duty-cycle profile. Pure functions, no I/O.
//
// Battery-life arithmetic Q = I·t (common practice, no source): hours =
// capacity / average current. Optional allowances, applied only when asked:
//  - regulator: battery current = load current / efficiency + quiescent
//    current (a current-domain approximation: it ignores the voltage ratio
//    of a switching converter);
//  - self-discharge: a fixed fraction of the starting capacity lost per month
//    (30.44 days), treated as an extra constant drain;
//  - Peukert derating: capacity at the average current from a fit.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "analysis/calendar.h"
#include "analysis/peukert.h"

namespace kp {

// One level of a repeating duty cycle.
struct ProfileLevel {
  double current_a = 0.0;
  double duration_s = 0.0;
  bool compressed = false;  // shortened in the test by the profile's compression factor
};

// A repeating duty cycle. A test may run it time-compressed: levels marked
// `compressed` (usually the long sleep) last duration / compression_factor in
// the test and `duration` in the product.
struct DutyProfile {
  std::vector<ProfileLevel> levels;
  double compression_factor = 1.0;
};

// Time-weighted mean current of one product cycle (uncompressed durations):
// Σ I·d / Σ d. Zero for an empty profile.
double ProfileAverageCurrentA(const DutyProfile& profile);
// The same over the cycle as the test runs it (compressed durations).
double ProfileTestAverageCurrentA(const DutyProfile& profile);
double ProfilePeakCurrentA(const DutyProfile& profile);
double ProfileCycleS(const DutyProfile& profile);

// A duty profile is written only as a procedure's `duty` block
// (procedures/LANGUAGE.md); `kneepoint life --duty` reads it there and fills
// this struct.

struct LifeInputs {
  double capacity_mah = 0.0;
  double average_current_a = 0.0;                  // load current
  std::optional<double> self_discharge_per_month;  // fraction, e.g. 0.02
  std::optional<double> quiescent_a;               // regulator quiescent current
  std::optional<double> efficiency;                // regulator efficiency (0, 1]
  std::optional<PeukertFit> peukert;               // derate the capacity at the average current
};

struct LifeProjection {
  double average_current_a = 0.0;  // load average
  double battery_current_a = 0.0;  // after regulator allowances
  double self_discharge_a = 0.0;   // equivalent drain
  double capacity_mah = 0.0;       // after Peukert derating
  double hours = 0.0;
  double years = 0.0;                    // hours / 8766 (365.25 days)
  std::vector<std::string> allowances;   // names of the allowances applied
  std::vector<std::string> assumptions;  // sentences printed beside the result
};

struct LifeOutcome {
  std::optional<LifeProjection> projection;
  std::string error;
};
LifeOutcome ProjectLife(const LifeInputs& inputs);

// kHoursPerYear, kHoursPerMonth: analysis/calendar.h (one month for the whole program).

}  // namespace kp
