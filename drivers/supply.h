// SupplyDriver: a programmable DC supply used to charge the cell (constant
// current up to a voltage, then constant voltage while the current tapers).
// Its SCPI text is data, like the other roles (generic defaults below).
// Current reported here is the supply's output, i.e. charging current; the run
// controller logs it as negative cell current.
#pragma once

#include <string>

#include "drivers/scpi_session.h"

namespace kp {

struct SupplyCommands {
  std::string set_voltage = "VOLT {}";
  std::string set_current = "CURR {}";
  std::string output_on = "OUTP ON";
  std::string output_off = "OUTP OFF";
  std::string measure_voltage = "MEAS:VOLT?";
  std::string measure_current = "MEAS:CURR?";
  std::string output_state;  // optional; empty: ReadBackQuery(output_off) (drivers/roles.h)
};

class SupplyDriver {
 public:
  SupplyDriver(ScpiSession& session, SupplyCommands commands = {}) : session_(session), cmd_(std::move(commands)) {}
  Status SetVoltage(double volts);
  Status SetCurrentLimit(double amps);
  Status SetOutput(bool on);
  Result<double> MeasureVoltage();
  Result<double> MeasureCurrent();  // >= 0 while charging
  // The output's state as the supply reports it.
  Result<bool> OutputState();
  // The voltage and current-limit settings the supply holds (ReadBackQuery of
  // set_voltage / set_current), for reconciliation.
  Result<double> ReadVoltageSetting();
  Result<double> ReadCurrentSetting();
  const SupplyCommands& commands() const { return cmd_; }
  ScpiSession& session() { return session_; }

 private:
  ScpiSession& session_;
  SupplyCommands cmd_;
};

}  // namespace kp
