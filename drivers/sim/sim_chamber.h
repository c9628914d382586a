// Simulated temperature chamber: its temperature follows the set point as a
// first-order lag, dT/dt = (T_target − T)/tau, integrated exactly between
// the moments it is addressed (T ← T_target + (T − T_target)·e^(−Δt/tau)),
// on the injected Clock. T_target is the set point while running and the
// room temperature when stopped. When given a SimBench, the chamber's
// temperature is the cell's surroundings (SimBench::SetAmbient).
// SCPI: TEMP:SETP <degC>, TEMP:SETP?, MEAS:TEMP?, OUTP ON|OFF, OUTP?,
// *IDN?, *RST, *CLS, *OPC?, SYST:ERR? (out-of-range set points queue -222).
// Thread-safe.
#pragma once

#include <deque>
#include <mutex>
#include <optional>
#include <string>

#include "drivers/clock.h"
#include "drivers/transport.h"

namespace kp::sim {

class SimBench;

struct SimChamberOptions {
  double tau_s = 600.0;    // time constant of the lag
  double room_c = 23.0;    // where it drifts when stopped, and where it starts
  double min_c = -40.0;    // set points it accepts
  double max_c = 150.0;
};

class SimChamber final : public LineDevice {
 public:
  SimChamber(Clock& clock, SimChamberOptions options = {}, SimBench* bench = nullptr);
  std::optional<std::string> HandleLine(std::string_view line) override;
  double temperature_c();  // integrated up to the clock first
  bool running() const;

 private:
  void AdvanceLocked();
  Clock& clock_;
  SimChamberOptions options_;
  SimBench* bench_;
  mutable std::mutex mu_;
  Seconds last_;
  double temperature_c_;
  double setpoint_c_;
  bool running_ = false;
  std::deque<std::string> errors_;
};

}  // namespace kp::sim
