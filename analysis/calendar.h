// Calendar lengths shared by every layer (the simulator's self-discharge,
// `life` projections, rates written per month or year). A header of constants
// with no dependencies, so any folder may include it as it includes sample.h.
#pragma once

namespace kp {

// Mean Gregorian-ish year of 365.25 days (the Julian year), and a month as a
// twelfth of it: 30.4375 days, the "30.44 days" of `life`.
inline constexpr double kDaysPerYear = 365.25;
inline constexpr double kDaysPerMonth = kDaysPerYear / 12.0;
inline constexpr double kHoursPerYear = kDaysPerYear * 24.0;
inline constexpr double kHoursPerMonth = kHoursPerYear / 12.0;
inline constexpr double kSecondsPerMonth = kHoursPerMonth * 3600.0;

}  // namespace kp
