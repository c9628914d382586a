#include "drivers/supply.h"

#include <fmt/format.h>

#include "drivers/roles.h"

namespace kp {
namespace {

Status Send(ScpiSession& s, const std::string& templ, double value, const char* what) {
  if (templ.empty()) return InvalidInput(fmt::format("{}: the instrument profile has no command to {}", s.address(), what));
  std::string line = templ;
  size_t pos = line.find("{}");
  if (pos != std::string::npos) line.replace(pos, 2, FormatNr3(value));
  return s.Write(line);
}

}  // namespace

Status SupplyDriver::SetVoltage(double volts) { return Send(session_, cmd_.set_voltage, volts, "set the voltage"); }
Status SupplyDriver::SetCurrentLimit(double amps) { return Send(session_, cmd_.set_current, amps, "set the current limit"); }
Status SupplyDriver::SetOutput(bool on) { return session_.Write(on ? cmd_.output_on : cmd_.output_off); }
Result<double> SupplyDriver::MeasureVoltage() { return ReadFiniteNumber(session_, cmd_.measure_voltage, "supply voltage"); }
Result<bool> SupplyDriver::OutputState() {
  std::string query = cmd_.output_state.empty() ? ReadBackQuery(cmd_.output_off) : cmd_.output_state;
  KP_ASSIGN_OR_RETURN(std::string reply, session_.Query(query));
  std::optional<bool> on = ParseStateReply(reply);
  if (!on) return ProtocolError(fmt::format("{}: '{}' answered '{}', not a state (1/0/ON/OFF)", session_.address(), query, reply));
  return *on;
}
Result<double> SupplyDriver::ReadVoltageSetting() {
  return ReadFiniteNumber(session_, ReadBackQuery(cmd_.set_voltage), "the supply's voltage setting");
}
Result<double> SupplyDriver::ReadCurrentSetting() {
  return ReadFiniteNumber(session_, ReadBackQuery(cmd_.set_current), "the supply's current limit");
}
Result<double> SupplyDriver::MeasureCurrent() { return ReadFiniteNumber(session_, cmd_.measure_current, "supply current"); }

}  // namespace kp
