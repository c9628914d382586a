#include "rig/safety_monitor.h"

#include <cmath>

#include <fmt/format.h>

namespace kp {

std::optional<std::string> SafetyMonitor::Check(const Reading& r, double delivered_mah) const {
  if (r.temperature_c >= limits_.max_temp_c)
    return fmt::format("over-temperature: cell at {:.1f} degC, limit {:.1f} degC", r.temperature_c, limits_.max_temp_c);
  if (r.voltage_v > limits_.max_voltage_v)
    return fmt::format("over-voltage: cell at {:.3f} V, limit {:.3f} V", r.voltage_v, limits_.max_voltage_v);
  if (r.voltage_v < limits_.min_voltage_v)
    return fmt::format("under-voltage: cell at {:.3f} V, limit {:.3f} V", r.voltage_v, limits_.min_voltage_v);
  if (std::fabs(r.current_a) > limits_.max_current_a)
    return fmt::format("over-current: {:.3f} A, limit {:.3f} A", std::fabs(r.current_a), limits_.max_current_a);
  if (r.t_s > limits_.max_total_s)
    return fmt::format("time limit: {:.0f} s elapsed, limit {:.0f} s", r.t_s, limits_.max_total_s);
  if (delivered_mah > limits_.max_charge_mah)
    return fmt::format("charge limit: {:.1f} mAh delivered, limit {:.1f} mAh (check the sense leads)", delivered_mah,
                       limits_.max_charge_mah);
  return std::nullopt;
}

}  // namespace kp
