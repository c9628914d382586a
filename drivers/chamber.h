// Temperature chamber: a climate chamber the cell sits in, driven over SCPI
// (set point, read, run/stop), with safety limits of its own and the soak
// judgement ("stable within ±X for Y") that decides when the cell may be
// tested at the new temperature. The commands are dialect data (role
// "chamber" in a .kpd; the defaults are what the simulated chamber speaks).
#pragma once

#include <optional>
#include <string>

#include "drivers/scpi_session.h"

namespace kp {

struct ChamberCommands {
  std::string set_temperature = "TEMP:SETP {}";  // degC
  std::string read_temperature = "MEAS:TEMP?";    // the chamber's air (or product) probe, degC
  std::string run_on = "OUTP ON";                 // start conditioning
  std::string run_off = "OUTP OFF";               // stop: the chamber drifts to room temperature
};

// What the chamber may be asked and may read (rig or procedure limits).
// A set point outside [min_c, max_c] is refused before it is sent; a reading
// more than `alarm_margin_c` outside it is an error (a runaway chamber or
// cell). Unset limits do not apply.
struct ChamberLimits {
  std::optional<double> min_c, max_c;
  double alarm_margin_c = 5.0;
};

class ChamberDriver {
 public:
  ChamberDriver(ScpiSession& session, ChamberCommands commands = {}, ChamberLimits limits = {})
      : session_(session), cmd_(std::move(commands)), limits_(limits) {}
  // Refused (kLimitExceeded) outside the limits; then sent and, with run_on, started.
  Status SetTemperature(double celsius);
  Status Run(bool on);
  // kLimitExceeded when the reading is past a limit by more than the alarm margin.
  Result<double> ReadTemperature();
  const ChamberLimits& limits() const { return limits_; }
  const ChamberCommands& commands() const { return cmd_; }
  ScpiSession& session() { return session_; }

 private:
  ScpiSession& session_;
  ChamberCommands cmd_;
  ChamberLimits limits_;
};

// Soak: done once every reading for `hold_s` has been within ±band_c of the
// set point (a reading outside restarts the count); failed when that has not
// happened `max_s` after the soak began. Pure: fed readings, no I/O.
struct SoakSpec {
  double setpoint_c = 25.0;
  double band_c = 1.0;
  double hold_s = 600.0;
  double max_s = 4 * 3600.0;
};

class SoakJudge {
 public:
  enum class State { kSettling, kStable, kTimedOut };
  SoakJudge(SoakSpec spec, double start_s) : spec_(spec), start_s_(start_s) {}
  State OnReading(double t_s, double temperature_c);
  State state() const { return state_; }
  // Since when the readings have stayed in the band (nullopt: not in it now).
  std::optional<double> in_band_since_s() const { return in_band_since_s_; }
  // One line for the log: "stable at 45.0 degC ±0.5 for 10 min (in band from 2273 s)".
  std::string Describe() const;

 private:
  SoakSpec spec_;
  double start_s_;
  std::optional<double> in_band_since_s_;
  State state_ = State::kSettling;
};

}  // namespace kp
