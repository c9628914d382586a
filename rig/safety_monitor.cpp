#include "rig/safety_monitor.h"

#include <fmt/format.h>

#include <cmath>

namespace kp {

SafetyVerdict SafetyMonitor::Check(const Reading& r, double delivered_mah) const {
  auto abort = [](std::string why) { return SafetyVerdict{SafetyVerdict::kAbort, std::move(why)}; };
  if (r.temperature_c >= limits_.max_temp_c) {
    if (limits_.over_temp_action == OverTempAction::kPause && r.temperature_c < limits_.hard_temp_c)
      return {SafetyVerdict::kPause,
              fmt::format("over-temperature: cell at {:.1f} °C, limit {:.1f} °C; pausing until {:.1f} °C", r.temperature_c,
                          limits_.max_temp_c, limits_.resume_temp_c)};
    double limit = limits_.over_temp_action == OverTempAction::kPause ? limits_.hard_temp_c : limits_.max_temp_c;
    return abort(fmt::format("over-temperature: cell at {:.1f} °C, limit {:.1f} °C", r.temperature_c, limit));
  }
  if (r.voltage_v > limits_.max_voltage_v)
    return abort(fmt::format("over-voltage: cell at {:.3f} V, limit {:.3f} V", r.voltage_v, limits_.max_voltage_v));
  if (r.voltage_v < limits_.min_voltage_v)
    return abort(fmt::format("under-voltage: cell at {:.3f} V, limit {:.3f} V", r.voltage_v, limits_.min_voltage_v));
  if (std::fabs(r.current_a) > limits_.max_current_a)
    return abort(fmt::format("over-current: {:.3f} A, limit {:.3f} A", std::fabs(r.current_a), limits_.max_current_a));
  if (r.t_s > limits_.max_total_s)
    return abort(fmt::format("time limit: {:.0f} s elapsed, limit {:.0f} s", r.t_s, limits_.max_total_s));
  if (delivered_mah > limits_.max_charge_mah)
    return abort(fmt::format("charge limit: {:.1f} mAh delivered, limit {:.1f} mAh (check the sense leads)", delivered_mah,
                             limits_.max_charge_mah));
  return {};
}

const char* SafetyCautions() {
  return "SAFETY: lithium cells can vent, catch fire or explode when abused.\n"
         "  - Fuse the leads close to the cell and use wiring rated for the test current.\n"
         "  - Tape the thermal probe to the cell body; keep the over-temperature limit set.\n"
         "  - Test inside a fire-safe container, away from flammables, with a way to cut power.\n"
         "  - Never leave a test unattended without limits that stop it safely.\n"
         "  - Follow your local codes and your lab's safety rules; they take precedence.\n";
}

}  // namespace kp
