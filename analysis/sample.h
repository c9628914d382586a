// Sample: one logged reading, as the store hands it to analysis. Analysis
// depends on this view only (never on SQLite or the instruments).
#pragma once

#include <span>

namespace kp {

struct Sample {
  double t_s = 0.0;            // seconds since run start
  double voltage_v = 0.0;      // cell terminal voltage
  double current_a = 0.0;      // > 0 discharging, < 0 charging
  double temperature_c = 0.0;  // cell surface temperature
  int step = 0;                // index of the step in the plan
};

using SampleSpan = std::span<const Sample>;

}  // namespace kp
