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

const char* LoadGuardName(LoadGuard g) {
  switch (g) {
    case LoadGuard::kUnderVoltage: return "undervoltage";
    case LoadGuard::kOverCurrent: return "overcurrent";
    case LoadGuard::kOverPower: return "overpower";
    case LoadGuard::kWatchdog: return "watchdog";
  }
  return "?";
}

const char* LoadGuardUnit(LoadGuard g) {
  switch (g) {
    case LoadGuard::kUnderVoltage: return "V";
    case LoadGuard::kOverCurrent: return "A";
    case LoadGuard::kOverPower: return "W";
    case LoadGuard::kWatchdog: return "s";
  }
  return "";
}

namespace {
// `command` without a trailing SCPI channel list ("INP ON,(@3)" -> "INP ON");
// the list ("(@3)") into `*list` when given.
std::string_view WithoutChannelList(std::string_view command, std::string_view* list) {
  size_t at = command.rfind("(@");
  if (at == std::string_view::npos || command.empty() || command.back() != ')') return command;
  if (list != nullptr) *list = command.substr(at);
  command = command.substr(0, at);
  while (!command.empty() && (command.back() == ' ' || command.back() == ',' || command.back() == '\t')) command.remove_suffix(1);
  return command;
}
}  // namespace

// A command ending in a SCPI channel list keeps it: "CURR {},(@3)" -> "CURR? (@3)".
std::string ReadBackQuery(std::string_view command) {
  size_t start = command.find_first_not_of(" \t");
  if (start == std::string_view::npos) return {};
  command.remove_prefix(start);
  std::string_view list;
  command = WithoutChannelList(command, &list);
  std::string_view header = command.substr(0, command.find_first_of(" \t"));
  std::string q(header);
  if (q.back() != '?') q += '?';
  if (!list.empty()) q += " " + std::string(list);  // the same channel: "CURR 1,(@3)" -> "CURR? (@3)"
  return q;
}

std::optional<bool> ParseStateReply(std::string_view r) {
  while (!r.empty() && (r.front() == ' ' || r.front() == '\t' || r.front() == '+')) r.remove_prefix(1);
  while (!r.empty() && (r.back() == ' ' || r.back() == '\t' || r.back() == '\r' || r.back() == '\n')) r.remove_suffix(1);
  auto is = [&](std::string_view word) {
    if (r.size() != word.size()) return false;
    for (size_t i = 0; i < r.size(); ++i)
      if ((r[i] | 0x20) != word[i]) return false;
    return true;
  };
  if (r == "1" || is("on")) return true;
  if (r == "0" || is("off")) return false;
  return std::nullopt;
}

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
  if (n.finite()) return n.value;
  std::string why = n.kind == ScpiNumber::Kind::kNotANumber ? "is not a number (9.91E37)" : "is over range (9.9E37, no reading)";
  Status queued = session.DrainErrors();
  std::string extra = queued.ok() ? "" : "; " + queued.message();
  return ProtocolError(fmt::format("{}: {} {}{}", session.address(), what, why, extra));
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
  if (cmd_.mode_settle_s > 0) {
    Clock& clock = session_.clock();
    clock.SleepUntil(clock.Now() + Seconds(cmd_.mode_settle_s));
  }
  return Status::Ok();
}

Status LoadDriver::SetLevel(LoadMode mode, double level) {
  if (!mode_known_ || mode != mode_) KP_RETURN_IF_ERROR(SetMode(mode));
  if (mode == LoadMode::kCurrent && max_current_a_ > 0 && level > max_current_a_)
    return LimitExceeded(fmt::format("{}: {:.3f} A is above the rig's max current {:.3f} A", session_.address(), level, max_current_a_));
  if (mode == LoadMode::kPower && max_power_w_ > 0 && level > max_power_w_)
    return LimitExceeded(fmt::format("{}: {:.2f} W is above the load rating {:.2f} W", session_.address(), level, max_power_w_));
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

Status LoadDriver::SetOverCurrentBackstop(double amps) {
  return Command(cmd_.over_current_backstop, amps, "set the over-current protection");
}

namespace {
const std::string& GuardCommand(const LoadCommands& c, LoadGuard g) {
  switch (g) {
    case LoadGuard::kUnderVoltage: return c.under_voltage_backstop;
    case LoadGuard::kOverCurrent: return c.over_current_backstop;
    case LoadGuard::kOverPower: return c.over_power_backstop;
    case LoadGuard::kWatchdog: return c.watchdog_backstop;
  }
  return c.under_voltage_backstop;
}
const std::string& GuardRead(const LoadCommands& c, LoadGuard g) {
  switch (g) {
    case LoadGuard::kUnderVoltage: return c.under_voltage_read;
    case LoadGuard::kOverCurrent: return c.over_current_read;
    case LoadGuard::kOverPower: return c.over_power_read;
    case LoadGuard::kWatchdog: return c.watchdog_read;
  }
  return c.under_voltage_read;
}
}  // namespace

bool LoadHasGuard(const LoadCommands& c, LoadGuard g) { return !GuardCommand(c, g).empty(); }
bool LoadDriver::HasGuard(LoadGuard g) const { return LoadHasGuard(cmd_, g); }

Status LoadDriver::SetGuard(LoadGuard g, double value) {
  return Command(GuardCommand(cmd_, g), value, fmt::format("set the {} guard", LoadGuardName(g)).c_str());
}

Result<double> LoadDriver::ReadGuard(LoadGuard g) {
  const std::string& q = GuardRead(cmd_, g);
  std::string query = q.empty() ? ReadBackQuery(GuardCommand(cmd_, g)) : q;
  return ReadFiniteNumber(session_, query, LoadGuardName(g));
}

Result<bool> LoadDriver::InputState() {
  std::string query = cmd_.input_state.empty() ? ReadBackQuery(cmd_.input_off) : cmd_.input_state;
  if (query.empty()) return InvalidInput(fmt::format("{}: the instrument profile has no query for the input state", session_.address()));
  KP_ASSIGN_OR_RETURN(std::string reply, session_.Query(query));
  std::optional<bool> on = ParseStateReply(reply);
  if (!on) return ProtocolError(fmt::format("{}: '{}' answered '{}', not a state (1/0/ON/OFF)", session_.address(), query, reply));
  return *on;
}

namespace {
// "FUNC CURR" -> "CURR"; quotes and blanks stripped, upper case.
std::string UpperWord(std::string_view t) {
  std::string out;
  for (char ch : t)
    if (ch != '"' && ch != '\'' && ch != ' ' && ch != '\t' && ch != '\r' && ch != '\n')
      out += static_cast<char>(ch >= 'a' && ch <= 'z' ? ch - 'a' + 'A' : ch);
  return out;
}
bool SameModeWord(const std::string& reply, const std::string& full_command) {
  std::string_view command = WithoutChannelList(full_command, nullptr);
  size_t sp = command.find_first_of(" \t");
  if (sp == std::string::npos) return false;
  std::string arg = UpperWord(command.substr(sp + 1));
  if (arg.empty() || reply.empty()) return false;
  if (arg == reply) return true;
  // Short and long forms: CURR / CURRENT, RES / RESISTANCE.
  const std::string& shorter = arg.size() < reply.size() ? arg : reply;
  const std::string& longer = arg.size() < reply.size() ? reply : arg;
  return shorter.size() >= 3 && longer.compare(0, shorter.size(), shorter) == 0;
}
}  // namespace

Result<LoadMode> LoadDriver::ReadMode() {
  std::string query = cmd_.mode_read.empty() ? ReadBackQuery(cmd_.mode_current) : cmd_.mode_read;
  if (query.empty()) return InvalidInput(fmt::format("{}: the instrument profile has no query for the mode", session_.address()));
  KP_ASSIGN_OR_RETURN(std::string reply, session_.Query(query));
  std::string word = UpperWord(reply);
  if (SameModeWord(word, cmd_.mode_current)) return LoadMode::kCurrent;
  if (SameModeWord(word, cmd_.mode_resistance)) return LoadMode::kResistance;
  if (SameModeWord(word, cmd_.mode_power)) return LoadMode::kPower;
  return ProtocolError(fmt::format("{}: '{}' answered '{}', not one of the profile's modes", session_.address(), query, reply));
}

Result<double> LoadDriver::ReadLevel(LoadMode mode) {
  const std::string& c = mode == LoadMode::kCurrent ? cmd_.set_current : mode == LoadMode::kResistance ? cmd_.set_resistance : cmd_.set_power;
  return ReadFiniteNumber(session_, ReadBackQuery(c), "the load's level");
}

Status LoadDriver::SetRemoteSense(bool on) {
  const std::string& c = on ? cmd_.remote_sense_on : cmd_.remote_sense_off;
  if (c.empty()) return InvalidInput(fmt::format("{}: the instrument profile has no command to switch remote sense", session_.address()));
  return session_.Write(c);
}

Result<double> LoadDriver::MeasureVoltage() {
  KP_ASSIGN_OR_RETURN(double v, ReadFiniteNumber(session_, cmd_.measure_voltage, "load voltage"));
  return cal_v_.Apply(v);
}
Result<double> LoadDriver::MeasureCurrent() {
  KP_ASSIGN_OR_RETURN(double i, ReadFiniteNumber(session_, cmd_.measure_current, "load current"));
  return cal_i_.Apply(i);
}
Result<double> LoadDriver::MeasurePower() { return ReadFiniteNumber(session_, cmd_.measure_power, "load power"); }

Result<double> MeterDriver::MeasureVoltage() {
  KP_ASSIGN_OR_RETURN(double v, ReadFiniteNumber(session_, cmd_.measure_voltage, "cell voltage"));
  same_count_ = (same_count_ > 0 && v == last_raw_) ? same_count_ + 1 : 1;
  last_raw_ = v;
  if (stuck_limit_ > 0 && same_count_ >= stuck_limit_)
    return ProtocolError(fmt::format("{}: cell voltage read exactly {} V {} times in a row: the meter looks stuck", session_.address(),
                                     FormatNr3(v), same_count_));
  return cal_.Apply(v);
}

Result<double> ThermometerDriver::MeasureTemperature() {
  KP_ASSIGN_OR_RETURN(double t, ReadFiniteNumber(session_, cmd_.measure_temperature, "cell temperature"));
  return cal_.Apply(t);
}

}  // namespace kp
