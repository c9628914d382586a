#include "analysis/metrics.h"

#include <fmt/format.h>

#include <algorithm>

namespace kp {

double DeliveredChargeMah(SampleSpan s) {
  double as = 0.0;  // ampere-seconds
  for (size_t i = 1; i < s.size(); ++i) as += 0.5 * (s[i].current_a + s[i - 1].current_a) * (s[i].t_s - s[i - 1].t_s);
  return as / 3.6;  // 1 mAh = 3.6 A·s
}

double DeliveredEnergyWh(SampleSpan s) {
  double ws = 0.0;
  for (size_t i = 1; i < s.size(); ++i) {
    double p0 = s[i - 1].voltage_v * s[i - 1].current_a;
    double p1 = s[i].voltage_v * s[i].current_a;
    ws += 0.5 * (p0 + p1) * (s[i].t_s - s[i - 1].t_s);
  }
  return ws / 3600.0;
}

double DurationS(SampleSpan s) { return s.size() < 2 ? 0.0 : s.back().t_s - s.front().t_s; }

double MeanVoltage(SampleSpan s) {
  if (s.empty()) return 0.0;
  double t = DurationS(s);
  if (t <= 0) {
    double sum = 0.0;
    for (const Sample& x : s) sum += x.voltage_v;
    return sum / static_cast<double>(s.size());
  }
  double vs = 0.0;
  for (size_t i = 1; i < s.size(); ++i) vs += 0.5 * (s[i].voltage_v + s[i - 1].voltage_v) * (s[i].t_s - s[i - 1].t_s);
  return vs / t;
}

std::optional<double> MaxTemperatureC(SampleSpan s) {
  if (s.empty()) return std::nullopt;
  double m = s.front().temperature_c;
  for (const Sample& x : s) m = std::max(m, x.temperature_c);
  return m;
}

double PercentOfRated(double delivered_mah, double rated_mah) { return rated_mah > 0 ? 100.0 * delivered_mah / rated_mah : 0.0; }

RunFigures ComputeRunFigures(SampleSpan s) {
  RunFigures f;
  f.charge_mah = DeliveredChargeMah(s);
  f.energy_wh = DeliveredEnergyWh(s);
  f.mean_voltage_v = MeanVoltage(s);
  f.duration_s = DurationS(s);
  f.sample_count = s.size();
  if (!s.empty()) {
    f.min_voltage_v = s.front().voltage_v;
    for (const Sample& x : s) f.min_voltage_v = std::min(f.min_voltage_v, x.voltage_v);
    f.max_temperature_c = *MaxTemperatureC(s);
  }
  return f;
}

CapacityVerdict JudgeCapacity(double delivered_mah, double rated_mah, double required_percent) {
  CapacityVerdict v;
  v.percent_of_rated = PercentOfRated(delivered_mah, rated_mah);
  if (rated_mah <= 0) {
    v.text = "no rated capacity given";
    return v;
  }
  v.pass = v.percent_of_rated >= required_percent;
  v.text = fmt::format("{}: {:.0f} mAh is {:.1f} % of rated {:.0f} mAh (criterion >= {:.0f} %)", v.pass ? "PASS" : "FAIL",
                       delivered_mah, v.percent_of_rated, rated_mah, required_percent);
  return v;
}

}  // namespace kp
