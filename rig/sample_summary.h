// SampleSummary: what a run of consecutive samples adds up to — count, first
// and last sample, charge and energy integrated by the trapezoid rule over the
// actual sample times (discharged, charged, net, and discharged since the last
// charging interval), the time integral of voltage, and the range of each
// channel. Summaries of neighbouring stretches merge exactly: Merge adds the
// interval between the first stretch's last sample and the second's first,
// so a run's figures come from its stored blocks (Store, `sample_blocks`)
// without reading its samples, and equal a pass over every sample up to
// rounding. The panel's running figures are this summary.
#pragma once

#include <cstdint>

#include "analysis/sample.h"

namespace kp {

struct SampleSummary {
  int64_t count = 0;
  Sample first;  // valid when count > 0
  Sample last;
  double net_mah = 0.0;             // discharge positive, charge negative
  double discharged_mah = 0.0;      // intervals where the cell discharged
  double charged_mah = 0.0;         // intervals where it was charged
  double since_charge_mah = 0.0;    // discharged after the last charging interval
  bool has_charge = false;          // some interval charged (at more than 1 mA)
  double net_wh = 0.0;
  double discharged_wh = 0.0;
  double voltage_time_vs = 0.0;     // integral of V dt
  double min_voltage_v = 0.0, max_voltage_v = 0.0;
  double min_current_a = 0.0, max_current_a = 0.0;
  double min_temperature_c = 0.0, max_temperature_c = 0.0;

  void Add(const Sample& s);
  // Appends a summary of the samples that follow this one's.
  void Merge(const SampleSummary& next);
  bool empty() const { return count == 0; }

 private:
  // Integrates the interval from `a` to `b`.
  void Interval(const Sample& a, const Sample& b);
};

}  // namespace kp
