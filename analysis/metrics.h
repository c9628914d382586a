// Figures over a span of samples: pure functions, no I/O.
//
// Integration is trapezoidal over the actual sample times (no assumption of
// even spacing). Charge counts discharge current as positive.
#pragma once

#include <optional>
#include <string>

#include "analysis/sample.h"

namespace kp {

// ∫ I dt in mAh.
double DeliveredChargeMah(SampleSpan samples);
// ∫ V·I dt in Wh.
double DeliveredEnergyWh(SampleSpan samples);
// Time-weighted mean voltage ∫ V dt / T (the plain mean when T == 0).
double MeanVoltage(SampleSpan samples);
// Last sample time minus first.
double DurationS(SampleSpan samples);
// Highest temperature seen (nullopt on no samples).
std::optional<double> MaxTemperatureC(SampleSpan samples);
// 100 · delivered / rated; 0 when rated <= 0.
double PercentOfRated(double delivered_mah, double rated_mah);

struct RunFigures {
  double charge_mah = 0.0;
  double energy_wh = 0.0;
  double mean_voltage_v = 0.0;
  double duration_s = 0.0;
  double min_voltage_v = 0.0;
  double max_temperature_c = 0.0;
  size_t sample_count = 0;
};

RunFigures ComputeRunFigures(SampleSpan samples);

// Capacity verdict: delivered charge against the rated value. The
// rated-capacity criterion (IEC 61960-3 clause 7.3.1) is pass when the
// delivered capacity is at least 100 % of rated (from memory).
struct CapacityVerdict {
  double percent_of_rated = 0.0;
  bool pass = false;
  std::string text;  // "PASS: 2,561 mAh is 102.4 % of rated 2,500 mAh"
};
CapacityVerdict JudgeCapacity(double delivered_mah, double rated_mah, double required_percent = 100.0);

}  // namespace kp
