#include "rig/sample_summary.h"

#include <algorithm>

namespace kp {

void SampleSummary::Interval(const Sample& a, const Sample& b) {
  const double dt_s = b.t_s - a.t_s;
  const double dt_h = dt_s / 3600.0;
  const double mean_a = 0.5 * (b.current_a + a.current_a);
  net_mah += mean_a * dt_h * 1000.0;
  discharged_mah += std::max(0.0, mean_a) * dt_h * 1000.0;
  charged_mah += std::max(0.0, -mean_a) * dt_h * 1000.0;
  // Rest readings (|I| under 1 mA) neither count as charging nor reset it.
  if (mean_a < -0.001) {
    since_charge_mah = 0.0;
    has_charge = true;
  } else {
    since_charge_mah += std::max(0.0, mean_a) * dt_h * 1000.0;
  }
  const double mean_w = 0.5 * (b.voltage_v * b.current_a + a.voltage_v * a.current_a);
  net_wh += mean_w * dt_h;
  discharged_wh += std::max(0.0, mean_w) * dt_h;
  voltage_time_vs += 0.5 * (b.voltage_v + a.voltage_v) * dt_s;
}

void SampleSummary::Add(const Sample& s) {
  if (count == 0) {
    first = s;
    min_voltage_v = max_voltage_v = s.voltage_v;
    min_current_a = max_current_a = s.current_a;
    min_temperature_c = max_temperature_c = s.temperature_c;
  } else {
    Interval(last, s);
    min_voltage_v = std::min(min_voltage_v, s.voltage_v);
    max_voltage_v = std::max(max_voltage_v, s.voltage_v);
    min_current_a = std::min(min_current_a, s.current_a);
    max_current_a = std::max(max_current_a, s.current_a);
    min_temperature_c = std::min(min_temperature_c, s.temperature_c);
    max_temperature_c = std::max(max_temperature_c, s.temperature_c);
  }
  last = s;
  ++count;
}

void SampleSummary::Merge(const SampleSummary& next) {
  if (next.count == 0) return;
  if (count == 0) {
    *this = next;
    return;
  }
  Interval(last, next.first);
  net_mah += next.net_mah;
  discharged_mah += next.discharged_mah;
  charged_mah += next.charged_mah;
  since_charge_mah = next.has_charge ? next.since_charge_mah : since_charge_mah + next.since_charge_mah;
  has_charge = has_charge || next.has_charge;
  net_wh += next.net_wh;
  discharged_wh += next.discharged_wh;
  voltage_time_vs += next.voltage_time_vs;
  min_voltage_v = std::min(min_voltage_v, next.min_voltage_v);
  max_voltage_v = std::max(max_voltage_v, next.max_voltage_v);
  min_current_a = std::min(min_current_a, next.min_current_a);
  max_current_a = std::max(max_current_a, next.max_current_a);
  min_temperature_c = std::min(min_temperature_c, next.min_temperature_c);
  max_temperature_c = std::max(max_temperature_c, next.max_temperature_c);
  last = next.last;
  count += next.count;
}

}  // namespace kp
