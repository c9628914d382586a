// Capacity verdicts under a named method, with the test conditions that were
// and were not met. Pure functions, no I/O.
//
// IEC 61960-3 clause 7.3.1 (secondary lithium): discharge at 0.2 It to the
// end voltage at 20 ± 5 °C after a 1-4 h rest; pass at >= 100 % of rated
// (temperature and current unit from the standard's text; rest time and pass
// criterion from memory). IEC 61951-2 (NiMH): 0.2 It to 1.0 V at 20 ± 5 °C
// after a 1-4 h rest; rated capacity means >= 5 h at 0.2 It, i.e. >= 100 %
// (secondary / from memory). The current tolerance of ±1 % is the usual
// measurement tolerance of these standards (from memory).
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace kp {

struct CapacityMethod {
  std::string name;  // "IEC 61960-3 7.3.1 rated capacity"
  double required_percent = 100.0;
  double rate_it = 0.2;             // discharge current in It (rated mAh / 1 h)
  // Primary cells: IEC 60086 rates them by application discharge tests (a
  // load, a daily duration, an end voltage), not at a C-rate, so any constant
  // current is the test and the rating is compared at the procedure's drain.
  bool any_rate = false;
  bool rest_required = true;        // the rest-before-discharge condition applies
  double current_tolerance = 0.01;  // relative
  double temp_min_c = 15.0, temp_max_c = 25.0;
  double rest_min_s = 3600.0, rest_max_s = 4.0 * 3600.0;
  std::optional<double> end_voltage_v;  // set by the method (NiMH 1.0 V), else the procedure's
};

// IEC 61951-2 for "nimh"; IEC 61960-3 for secondary lithium chemistries;
// primary chemistries (alkaline, li-mno2, ...) any_rate, no rest; otherwise a
// plain ">= 100 % of rated at 0.2 It" check with the same conditions reported.
CapacityMethod MethodForChemistry(std::string_view chemistry);

// What the run shows about the discharge that was judged.
struct DischargeConditions {
  double rated_mah = 0.0;
  double delivered_mah = 0.0;
  double mean_current_a = 0.0;
  double max_current_deviation_a = 0.0;  // largest |I - mean| among its samples
  double start_temperature_c = 0.0;
  double min_temperature_c = 0.0, max_temperature_c = 0.0;
  std::optional<double> rest_before_s;  // rest step right before the discharge
  double end_voltage_v = 0.0;           // last sample of the discharge
  bool pulsed = false;                  // a pulse train or duty cycle, not one constant current
  // What the procedure commanded for the judged step; the rate (which test
  // this is) comes from it, the current condition from the measured mean.
  std::optional<double> commanded_current_a;
  // Non-empty when the discharge is not one constant current for another
  // reason than pulses: "constant-resistance discharge", "several levels".
  std::string not_constant_current;
  // Thermometer tolerance (±): a start temperature within it of the band counts.
  double temperature_tolerance_c = 0.0;
};

struct ConditionCheck {
  std::string name;
  std::string required;
  std::string observed;
  bool met = false;
};

// A discharge is judged under the method only when it is the method's test:
// one constant current within this fraction of the method's rate (the current
// condition itself is checked at the method's tighter tolerance). A pulsed
// run or a run at another rate delivers a figure, not a rated-capacity verdict.
inline constexpr double kJudgedRateWindow = 0.10;

struct CapacityJudgement {
  std::string method;
  double percent_of_rated = 0.0;
  bool judged = false;          // the discharge is the method's test (see kJudgedRateWindow)
  std::string not_judged_why;   // "pulsed discharge", "constant current at 0.50 It", "no rated capacity"
  bool capacity_pass = false;   // the capacity criterion alone (meaningful when judged)
  bool conditions_met = false;  // every condition below met
  std::vector<ConditionCheck> conditions;
  std::string text;   // one line: verdict, method and unmet conditions
  std::string brief;  // for tables: "PASS 101 %", "FAIL 97 %", "not judged: pulsed"
};

CapacityJudgement JudgeCapacityByMethod(const CapacityMethod& method, const DischargeConditions& run);

}  // namespace kp
