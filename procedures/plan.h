// Plan: a validated, compiled procedure — what the step engine executes. The
// procedure parser produces it; tests and built-in campaigns may also build one
// in code. All quantities are SI in the names' units.
#pragma once

#include <limits>
#include <optional>
#include <string>
#include <vector>

#include "drivers/roles.h"

namespace kp {

// The cell under test, from the procedure header.
struct CellSpec {
  std::string chemistry = "li-ion";
  double rated_mah = 0.0;
  double nominal_v = 0.0;
  double max_v = 0.0;
  double cutoff_v = 0.0;
  double max_temp_c = 60.0;
  // Current for a C-rate: 1C drains the rated capacity in one hour.
  double CRateToAmps(double c_rate) const { return c_rate * rated_mah / 1000.0; }
};

// Absolute limits checked on every sample, whatever the step logic does.
struct SafetyLimits {
  double max_temp_c = 60.0;
  double min_voltage_v = 0.0;
  double max_voltage_v = 5.0;
  double max_current_a = 10.0;
  double max_total_s = 72.0 * 3600.0;
  double max_charge_mah = std::numeric_limits<double>::infinity();
};

// Any combination may be set; the step ends at the first that holds.
struct EndConditions {
  std::optional<double> voltage_below_v;
  std::optional<double> voltage_above_v;
  std::optional<double> current_below_a;
  std::optional<double> time_s;
  std::optional<double> charge_mah;
  std::optional<double> energy_wh;
  std::optional<double> temperature_above_c;
};

enum class StepKind { kRest, kConstantCurrent };
const char* StepKindName(StepKind kind);

struct Step {
  StepKind kind = StepKind::kRest;
  std::string label;
  double current_a = 0.0;  // discharge current for kConstantCurrent
  double sample_period_s = 1.0;
  EndConditions end;
  int source_line = 0;  // where the step was written, for messages
};

struct Plan {
  std::string name;         // procedure name (file stem or built-in name)
  std::string source_text;  // the text it was compiled from, stored with the run
  CellSpec cell;
  SafetyLimits limits;
  std::vector<Step> steps;
};

// Built-in rated-capacity check: discharge at 0.2 It to the end voltage, as in
// IEC 61960-3 clause 7.3.1 (0.2 It to the manufacturer's end-of-discharge
// voltage at 20 ± 5 °C; secondary source, see shared references).
Plan RatedCapacityPlan(const CellSpec& cell, double sample_period_s = 1.0);

}  // namespace kp
