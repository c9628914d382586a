#include "drivers/roles.h"

#include <fmt/format.h>

namespace kp {
namespace {

std::string Fill(const std::string& templ, double value) {
  std::string out = templ;
  size_t pos = out.find("{}");
  if (pos != std::string::npos) out.replace(pos, 2, FormatNr3(value));
  return out;
}

}  // namespace

const char* LoadModeName(LoadMode mode) {
  switch (mode) {
    case LoadMode::kCurrent: return "constant current";
    case LoadMode::kResistance: return "constant resistance";
    case LoadMode::kPower: return "constant power";
  }
  return "?";
}

Result<double> ReadFiniteNumber(ScpiSession& session, const std::string& query, const char* what) {
  if (query.empty()) return InvalidInput(fmt::format("{}: the instrument profile has no command for {}", session.address(), what));
  KP_ASSIGN_OR_RETURN(ScpiNumber n, session.QueryNumber(query));
  switch (n.kind) {
    case ScpiNumber::Kind::kFinite: return n.value;
    case ScpiNumber::Kind::kOverflow:
    case ScpiNumber::Kind::kUnderflow:
      return ProtocolError(fmt::format("{}: {} is over range (9.9E37, no reading)", session.address(), what));
    case ScpiNumber::Kind::kNotANumber:
      return ProtocolError(fmt::format("{}: {} is not a number (9.91E37)", session.address(), what));
  }
  return InternalError("unreachable");
}

Status LoadDriver::Command(const std::string& templ, double value, const char* what) {
  if (templ.empty()) return InvalidInput(fmt::format("{}: the instrument profile has no command to {}", session_.address(), what));
  return session_.Write(Fill(templ, value));
}

Status LoadDriver::SetMode(LoadMode mode) {
  const std::string* c = &cmd_.mode_current;
  if (mode == LoadMode::kResistance) c = &cmd_.mode_resistance;
  if (mode == LoadMode::kPower) c = &cmd_.mode_power;
  if (c->empty()) return InvalidInput(fmt::format("{}: the load cannot run in {} mode", session_.address(), LoadModeName(mode)));
  KP_RETURN_IF_ERROR(session_.Write(*c));
  mode_ = mode;
  mode_known_ = true;
  return Status::Ok();
}

Status LoadDriver::SetLevel(LoadMode mode, double level) {
  if (!mode_known_ || mode != mode_) KP_RETURN_IF_ERROR(SetMode(mode));
  switch (mode) {
    case LoadMode::kCurrent: return Command(cmd_.set_current, level, "set the current");
    case LoadMode::kResistance: return Command(cmd_.set_resistance, level, "set the resistance");
    case LoadMode::kPower: return Command(cmd_.set_power, level, "set the power");
  }
  return InternalError("unreachable");
}

Status LoadDriver::SetInput(bool on) { return session_.Write(on ? cmd_.input_on : cmd_.input_off); }

Status LoadDriver::SetUnderVoltageBackstop(double volts) {
  return Command(cmd_.under_voltage_backstop, volts, "set the under-voltage protection");
}

Result<double> LoadDriver::MeasureVoltage() { return ReadFiniteNumber(session_, cmd_.measure_voltage, "load voltage"); }
Result<double> LoadDriver::MeasureCurrent() { return ReadFiniteNumber(session_, cmd_.measure_current, "load current"); }

Result<double> MeterDriver::MeasureVoltage() { return ReadFiniteNumber(session_, cmd_.measure_voltage, "cell voltage"); }

Result<double> ThermometerDriver::MeasureTemperature() {
  return ReadFiniteNumber(session_, cmd_.measure_temperature, "cell temperature");
}

}  // namespace kp
