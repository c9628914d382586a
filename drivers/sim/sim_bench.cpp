#include "drivers/sim/sim_bench.h"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <unordered_map>

#include "drivers/scpi_syntax.h"

namespace kp::sim {

// One simulated instrument: common IEEE 488.2 commands and an error queue,
// plus the role-specific headers.
class SimBench::Device final : public LineDevice {
 public:
  enum class Role { kLoad, kMeter, kThermometer, kSupply };
  Device(SimBench& bench, Role role) : bench_(bench), role_(role) {}

  std::optional<std::string> HandleLine(std::string_view line) override {
    std::lock_guard<std::mutex> lock(bench_.mu_);
    bench_.AdvanceLocked();
    // Any line to the load feeds its watchdog.
    if (role_ == Role::kLoad) bench_.last_load_line_ = bench_.sim_time_;
    // A program message may hold several units separated by ';' (SCPI-99
    // 6.2.3 / 7.4): a unit without a leading ':' or '*' continues the
    // previous header's path ("SOUR:VOLT 1;CURR 2" sets SOUR:CURR); the
    // replies of the queries are joined by ';' into one response message.
    if (line.find(';') == std::string_view::npos) return HandleUnit(line);
    std::string reply;
    bool any = false;
    std::string path;  // the previous header's nodes but the last, with ':'
    size_t start = 0;
    bool quoted = false;
    for (size_t i = 0; i <= line.size(); ++i) {
      if (i < line.size() && line[i] == '"') quoted = !quoted;
      if (i < line.size() && (quoted || line[i] != ';')) continue;
      std::string_view unit = line.substr(start, i - start);
      start = i + 1;
      while (!unit.empty() && (unit.front() == ' ' || unit.front() == '\t')) unit.remove_prefix(1);
      if (unit.empty()) continue;
      std::string full;
      if (unit.front() == ':') {
        full = std::string(unit.substr(1));
      } else if (unit.front() == '*') {
        full = std::string(unit);
      } else {
        full = path + std::string(unit);
      }
      if (full.front() != '*') {
        std::string_view header = std::string_view(full).substr(0, full.find_first_of(" \t"));
        size_t last = header.rfind(':');
        path = last == std::string_view::npos ? std::string() : std::string(header.substr(0, last + 1));
      }
      if (std::optional<std::string> r = HandleUnit(full)) {
        reply += (any ? ";" : "") + *r;
        any = true;
      }
    }
    if (!any) return std::nullopt;
    return reply;
  }

 private:
  // One program message unit; the bench's lock is held.
  std::optional<std::string> HandleUnit(std::string_view line) {
    // Kept in a member so that header_ never outlives the text it points to.
    line_ = SplitScpiCommand(line);
    const ScpiCommand& c = line_;
    const std::string& h = c.header;
    if (h.empty()) return std::nullopt;
    header_ = &h;
    auto memo = memo_.find(h);
    cached_ = memo != memo_.end() ? &memo->second : nullptr;
    if (Is("*IDN?")) return Identity();
    if (Is("*RST")) {
      if (role_ == Role::kLoad) ResetLoad();
      if (role_ == Role::kSupply) ResetSupply();
      return std::nullopt;
    }
    if (Is("*CLS")) {
      errors_.clear();
      return std::nullopt;
    }
    if (Is("*OPC?")) return std::string("1");
    // Remote and local control, as dialects' init and teardown lists send them.
    if (Is("SYSTem:REMote") || Is("SYSTem:RWLock") || Is("SYSTem:LOCal")) {
      bool remote = !Is("SYSTem:LOCal");
      if (role_ == Role::kLoad) bench_.load_remote_ = remote;
      return std::nullopt;
    }
    if (Is("SYSTem:REMote?")) return std::string(role_ == Role::kLoad && bench_.load_remote_ ? "1" : "0");
    if (Is("*ESR?") || Is("*STB?")) return std::string("0");
    if (Is("SYSTem:ERRor[:NEXT]?")) {
      if (errors_.empty()) return std::string("0,\"No error\"");
      std::string e = errors_.front();
      errors_.pop_front();
      return e;
    }
    std::optional<std::string> reply;
    bool handled = false;
    switch (role_) {
      case Role::kLoad:
        handled = HandleLoad(c, reply);
        break;
      case Role::kMeter:
        handled = HandleMeter(c, reply);
        break;
      case Role::kThermometer:
        handled = HandleThermometer(c, reply);
        break;
      case Role::kSupply:
        handled = HandleSupply(c, reply);
        break;
    }
    if (!handled) PushError(-113, "Undefined header");
    return reply;
  }

  std::string Identity() const {
    switch (role_) {
      case Role::kLoad:
        return "Kneepoint Simulation,KP-SIM-LOAD,SN0001,1.0";
      case Role::kMeter:
        return "Kneepoint Simulation,KP-SIM-METER,SN0002,1.0";
      case Role::kThermometer:
        return "Kneepoint Simulation,KP-SIM-TEMP,SN0003,1.0";
      case Role::kSupply:
        return "Kneepoint Simulation,KP-SIM-SUPPLY,SN0004,1.0";
    }
    return "";
  }

  void PushError(int code, const char* text) {
    if (errors_.size() >= 10) {
      errors_.back() = "-350,\"Queue overflow\"";
      return;
    }
    errors_.push_back(fmt::format("{},\"{}\"", code, text));
  }

  // Parses one numeric argument; queues -224 / -109 on bad input.
  std::optional<double> Number(const ScpiCommand& c, double lo, double hi) {
    if (c.args.size() != 1) {
      PushError(-109, "Missing parameter");
      return std::nullopt;
    }
    Result<ScpiNumber> n = ParseScpiNumber(c.args[0]);
    if (!n.ok() || !n->finite()) {
      PushError(-128, "Numeric data not allowed");
      return std::nullopt;
    }
    if (n->value < lo || n->value > hi) {
      PushError(-222, "Data out of range");
      return std::nullopt;
    }
    return n->value;
  }

  void ResetLoad() {
    bench_.input_on_ = false;
    bench_.mode_ = LoadMode::kCurrent;
    bench_.level_current_a_ = 0.0;
    bench_.level_resistance_ohm_ = 1e6;
    bench_.level_power_w_ = 0.0;
    bench_.uv_protect_v_ = 0.0;
    bench_.oc_protect_a_ = 0.0;
    bench_.op_protect_w_ = 0.0;
    bench_.watchdog_s_ = 0.0;
  }

  void ResetSupply() {
    bench_.supply_on_ = false;
    bench_.supply_voltage_v_ = 0.0;
    bench_.supply_current_limit_a_ = 0.0;
  }

  // Parses ON|OFF|1|0 into `out`; queues an error otherwise.
  void OnOff(const ScpiCommand& c, bool& out) {
    if (c.args.size() != 1) return PushError(-109, "Missing parameter");
    const std::string& a = c.args[0];
    if (a == "1" || ScpiHeaderMatches("ON", a))
      out = true;
    else if (a == "0" || ScpiHeaderMatches("OFF", a))
      out = false;
    else
      PushError(-224, "Illegal parameter value");
  }

  bool HandleSupply(const ScpiCommand& c, std::optional<std::string>& reply) {
    SimBench& b = bench_;
    if (Is("[SOURce:]VOLTage[:LEVel][:IMMediate][:AMPLitude]")) {
      if (auto v = Number(c, 0.0, b.options_.supply_max_voltage_v)) b.supply_voltage_v_ = *v;
      return true;
    }
    if (Is("[SOURce:]VOLTage[:LEVel][:IMMediate][:AMPLitude]?")) {
      reply = FormatNr3(b.supply_voltage_v_);
      return true;
    }
    if (Is("[SOURce:]CURRent[:LEVel][:IMMediate][:AMPLitude]")) {
      if (auto v = Number(c, 0.0, b.options_.supply_max_current_a)) b.supply_current_limit_a_ = *v;
      return true;
    }
    if (Is("[SOURce:]CURRent[:LEVel][:IMMediate][:AMPLitude]?")) {
      reply = FormatNr3(b.supply_current_limit_a_);
      return true;
    }
    if (Is("OUTPut[:STATe]")) {
      OnOff(c, b.supply_on_);
      return true;
    }
    if (Is("OUTPut[:STATe]?")) {
      reply = std::string(b.supply_on_ ? "1" : "0");
      return true;
    }
    if (Is("MEASure[:SCALar]:VOLTage[:DC]?")) {
      reply = FormatNr3(b.FlowsLocked().terminal_v);
      return true;
    }
    if (Is("MEASure[:SCALar]:CURRent[:DC]?")) {
      reply = FormatNr3(b.FlowsLocked().supply_a);
      return true;
    }
    return false;
  }

  bool HandleLoad(const ScpiCommand& c, std::optional<std::string>& reply) {
    SimBench& b = bench_;
    if (Is("[SOURce:]FUNCtion")) {
      if (c.args.size() != 1) return PushError(-109, "Missing parameter"), true;
      if (ScpiHeaderMatches("CURRent", c.args[0]))
        b.mode_ = LoadMode::kCurrent;
      else if (ScpiHeaderMatches("RESistance", c.args[0]))
        b.mode_ = LoadMode::kResistance;
      else if (ScpiHeaderMatches("POWer", c.args[0]))
        b.mode_ = LoadMode::kPower;
      else
        PushError(-224, "Illegal parameter value");
      return true;
    }
    if (Is("[SOURce:]FUNCtion?")) {
      reply = b.mode_ == LoadMode::kCurrent ? "CURR" : b.mode_ == LoadMode::kResistance ? "RES" : "POW";
      return true;
    }
    if (Is("[SOURce:]CURRent[:LEVel][:IMMediate][:AMPLitude]")) {
      if (auto v = Number(c, 0.0, b.options_.load_max_current_a)) b.level_current_a_ = *v;
      return true;
    }
    if (Is("[SOURce:]CURRent[:LEVel][:IMMediate][:AMPLitude]?")) {
      reply = FormatNr3(b.level_current_a_);
      return true;
    }
    if (Is("[SOURce:]RESistance[:LEVel][:IMMediate][:AMPLitude]")) {
      if (auto v = Number(c, 1e-3, 1e7)) b.level_resistance_ohm_ = *v;
      return true;
    }
    if (Is("[SOURce:]RESistance[:LEVel][:IMMediate][:AMPLitude]?")) {
      reply = FormatNr3(b.level_resistance_ohm_);
      return true;
    }
    if (Is("[SOURce:]POWer[:LEVel][:IMMediate][:AMPLitude]")) {
      if (auto v = Number(c, 0.0, 1000.0)) b.level_power_w_ = *v;
      return true;
    }
    if (Is("[SOURce:]POWer[:LEVel][:IMMediate][:AMPLitude]?")) {
      reply = FormatNr3(b.level_power_w_);
      return true;
    }
    if (Is("[SOURce:]VOLTage:PROTection:LOW")) {
      if (auto v = Number(c, 0.0, 100.0)) b.uv_protect_v_ = *v;
      return true;
    }
    if (Is("[SOURce:]VOLTage:PROTection:LOW?")) {
      reply = FormatNr3(b.uv_protect_v_);
      return true;
    }
    if (Is("[SOURce:]CURRent:PROTection[:LEVel]")) {
      if (auto v = Number(c, 0.0, 1000.0)) b.oc_protect_a_ = *v;
      return true;
    }
    if (Is("[SOURce:]CURRent:PROTection[:LEVel]?")) {
      reply = FormatNr3(b.oc_protect_a_);
      return true;
    }
    if (Is("[SOURce:]POWer:PROTection[:LEVel]")) {
      if (auto v = Number(c, 0.0, 100000.0)) b.op_protect_w_ = *v;
      return true;
    }
    if (Is("[SOURce:]POWer:PROTection[:LEVel]?")) {
      reply = FormatNr3(b.op_protect_w_);
      return true;
    }
    if (Is("PROTection:WATChdog[:TIMe]")) {
      if (auto v = Number(c, 0.0, 86400.0)) b.watchdog_s_ = *v;
      return true;
    }
    if (Is("PROTection:WATChdog[:TIMe]?")) {
      reply = FormatNr3(b.watchdog_s_);
      return true;
    }
    if (Is("INPut[:STATe]")) {
      OnOff(c, b.input_on_);
      if (b.input_on_) b.trip_.clear();
      b.TripLocked();
      return true;
    }
    if (Is("INPut[:STATe]?")) {
      reply = std::string(b.input_on_ ? "1" : "0");
      return true;
    }
    if (Is("MEASure[:SCALar]:VOLTage[:DC]?")) {
      reply = FormatNr3(TerminalVoltage());
      return true;
    }
    if (Is("MEASure[:SCALar]:CURRent[:DC]?")) {
      reply = FormatNr3(b.FlowsLocked().load_a);
      return true;
    }
    if (Is("MEASure[:SCALar]:POWer[:DC]?")) {
      Flows f = b.FlowsLocked();
      reply = FormatNr3(f.load_a * f.terminal_v);
      return true;
    }
    return false;
  }

  double TerminalVoltage() { return bench_.FlowsLocked().terminal_v; }

  bool HandleMeter(const ScpiCommand& /*c*/, std::optional<std::string>& reply) {
    if (Is("MEASure[:SCALar]:VOLTage[:DC]?")) {
      double v = TerminalVoltage();
      if (bench_.options_.meter_noise_v > 0) {
        std::normal_distribution<double> noise(0.0, bench_.options_.meter_noise_v);
        v += noise(bench_.rng_);
      }
      reply = FormatNr3(v);
      return true;
    }
    return false;
  }

  bool HandleThermometer(const ScpiCommand& /*c*/, std::optional<std::string>& reply) {
    if (Is("MEASure[:SCALar]:TEMPerature[:DC]?")) {
      reply = FormatNr3(bench_.cell_.temperature_c());
      return true;
    }
    return false;
  }

  // Header dispatch: each handler asks Is(pattern) in turn and the first match
  // wins. A run repeats a handful of headers thousands of times, so the
  // pattern that matched a header text is remembered and later calls compare
  // against it instead of parsing the pattern again.
  bool Is(std::string_view pattern) {
    if (cached_ != nullptr) return *cached_ == pattern;
    if (!ScpiHeaderMatches(pattern, *header_)) return false;
    if (memo_.size() > 256) memo_.clear();
    memo_.emplace(*header_, pattern);
    return true;
  }

  SimBench& bench_;
  Role role_;
  std::deque<std::string> errors_;
  std::unordered_map<std::string, std::string_view> memo_;
  ScpiCommand line_;  // the line being handled
  const std::string* header_ = nullptr;  // line_.header while a line is handled
  const std::string_view* cached_ = nullptr;
};

SimBench::SimBench(CellParams cell, Clock& clock, SimOptions options)
    : cell_(std::move(cell)), clock_(clock), options_(options), sim_time_(clock.Now()), rng_(options.seed) {
  load_ = std::make_unique<Device>(*this, Device::Role::kLoad);
  meter_ = std::make_unique<Device>(*this, Device::Role::kMeter);
  thermometer_ = std::make_unique<Device>(*this, Device::Role::kThermometer);
  supply_ = std::make_unique<Device>(*this, Device::Role::kSupply);
}

SimBench::~SimBench() = default;

LineDevice& SimBench::load() { return *load_; }
LineDevice& SimBench::meter() { return *meter_; }
LineDevice& SimBench::thermometer() { return *thermometer_; }
LineDevice& SimBench::supply() { return *supply_; }

bool SimBench::load_remote() const {
  std::lock_guard<std::mutex> lock(mu_);
  return load_remote_;
}

bool SimBench::load_input_on() const {
  std::lock_guard<std::mutex> lock(mu_);
  return input_on_;
}
std::string SimBench::load_trip() const {
  std::lock_guard<std::mutex> lock(mu_);
  return trip_;
}
double SimBench::load_current_a() const {
  std::lock_guard<std::mutex> lock(mu_);
  return FlowsLocked().load_a;
}
bool SimBench::supply_output_on() const {
  std::lock_guard<std::mutex> lock(mu_);
  return supply_on_;
}
double SimBench::supply_current_a() const {
  std::lock_guard<std::mutex> lock(mu_);
  return FlowsLocked().supply_a;
}
double SimBench::cell_current_a() const {
  std::lock_guard<std::mutex> lock(mu_);
  return FlowsLocked().cell_a;
}
double SimBench::cell_soc() const {
  std::lock_guard<std::mutex> lock(mu_);
  return cell_.soc();
}
double SimBench::cell_temperature_c() const {
  std::lock_guard<std::mutex> lock(mu_);
  return cell_.temperature_c();
}
CellModel SimBench::cell() {
  std::lock_guard<std::mutex> lock(mu_);
  AdvanceLocked();
  return cell_;
}
void SimBench::SetAmbient(double ambient_c) {
  std::lock_guard<std::mutex> lock(mu_);
  AdvanceLocked();
  cell_.set_ambient_c(ambient_c);
}

double SimBench::LoadCurrentAt(double terminal_v) const {
  if (!input_on_ || terminal_v <= 0) return 0.0;
  switch (mode_) {
    case LoadMode::kCurrent:
      return level_current_a_;
    case LoadMode::kResistance:
      return terminal_v / level_resistance_ohm_;
    case LoadMode::kPower:
      return level_power_w_ / terminal_v;
  }
  return 0.0;
}

SimBench::Flows SimBench::FlowsLocked() const {
  Flows f;
  const Thevenin t = cell_.Equivalent();
  const double emf = t.emf_v, r = t.r_ohm;
  // The load alone on the cell.
  double il = 0.0;
  if (input_on_ && emf > 0) {
    switch (mode_) {
      case LoadMode::kCurrent:
        il = level_current_a_;
        break;
      case LoadMode::kResistance:
        il = emf / (r + level_resistance_ohm_);
        break;
      case LoadMode::kPower: {
        // I·(E - I·R) = P  ->  R·I² - E·I + P = 0, smaller root; beyond the
        // maximum-power point the load gets E/(2R).
        double disc = emf * emf - 4.0 * r * level_power_w_;
        il = disc >= 0 ? (emf - std::sqrt(disc)) / (2.0 * r) : emf / (2.0 * r);
        break;
      }
    }
    f.state_dependent = mode_ != LoadMode::kCurrent;
    // A load cannot pull the terminal below 0 V.
    if (il > emf / r) il = emf / r, f.state_dependent = true;
    // Hardware under-voltage backstop: the load stops sinking below the limit.
    if (uv_protect_v_ > 0 && emf - il * r < uv_protect_v_) {
      il = std::max(0.0, (emf - uv_protect_v_) / r);
      f.state_dependent = true;
    }
    il = std::max(0.0, il);
  }
  f.load_a = il;
  if (supply_on_ && supply_current_limit_a_ > 0) {
    f.state_dependent = true;
    const double vs = supply_voltage_v_;
    // Constant voltage: the terminal sits at vs, the cell takes (vs − emf)/r.
    const double il_cv = LoadCurrentAt(vs);
    const double is_cv = il_cv + (vs - emf) / r;
    if (is_cv > 0 && is_cv <= supply_current_limit_a_) {
      f.supply_a = is_cv;
      f.load_a = il_cv;
    } else if (is_cv > supply_current_limit_a_) {
      // Constant current at the limit; the terminal settles where the load's
      // own law meets the cell's line V = emf − (I_load − I_supply)·r.
      const double is = supply_current_limit_a_;
      f.supply_a = is;
      if (input_on_) {
        switch (mode_) {
          case LoadMode::kCurrent:
            f.load_a = level_current_a_;
            break;
          case LoadMode::kResistance:
            f.load_a = (emf + is * r) / (1.0 + r / level_resistance_ohm_) / level_resistance_ohm_;
            break;
          case LoadMode::kPower: {
            // V² − (E + Is·r)·V + P·r = 0, larger root (the stable operating point).
            double e = emf + is * r;
            double disc = e * e - 4.0 * level_power_w_ * r;
            f.load_a = disc >= 0 ? level_power_w_ / ((e + std::sqrt(disc)) / 2.0) : il;
            break;
          }
        }
      }
    }
    // is_cv <= 0: the cell sits above the set voltage; a supply only sources.
  }
  f.cell_a = f.load_a - f.supply_a;
  f.terminal_v = emf - f.cell_a * r;
  return f;
}

void SimBench::TripLocked() {
  if (!input_on_) return;
  if (watchdog_s_ > 0 && (sim_time_ - last_load_line_).count() >= watchdog_s_) {
    input_on_ = false;
    trip_ = "watchdog";
    return;
  }
  const Flows f = FlowsLocked();
  if (oc_protect_a_ > 0 && f.load_a > oc_protect_a_) {
    input_on_ = false;
    trip_ = "overcurrent";
  } else if (op_protect_w_ > 0 && f.load_a * f.terminal_v > op_protect_w_) {
    input_on_ = false;
    trip_ = "overpower";
  }
}

void SimBench::AdvanceLocked() {
  Seconds now = clock_.Now();
  TripLocked();
  while (sim_time_ < now) {
    const Flows f = FlowsLocked();
    const bool runaway = options_.runaway_start_s >= 0 && sim_time_.count() >= options_.runaway_start_s;
    double limit = options_.max_rest_step_s;
    if (f.state_dependent || runaway || cell_.available_level() < 0.03) {
      limit = options_.max_step_s;
    } else if (f.cell_a != 0.0) {
      limit = options_.max_constant_current_step_s;
      // Close to the load's backstop the current will soon depend on the state.
      if (uv_protect_v_ > 0 && f.terminal_v - uv_protect_v_ < 0.3) limit = options_.max_step_s;
    }
    // The watchdog expires exactly on time, not at the end of a long step.
    if (input_on_ && watchdog_s_ > 0) limit = std::min(limit, watchdog_s_ - (sim_time_ - last_load_line_).count());
    limit = std::max(limit, 1e-6);
    double dt = std::min(limit, (now - sim_time_).count());
    double extra = 0.0;
    if (runaway) extra = options_.runaway_heat_rate_w_per_s * (sim_time_.count() - options_.runaway_start_s);
    cell_.Advance(dt, f.cell_a, extra);
    sim_time_ += Seconds(dt);
    TripLocked();
  }
}

}  // namespace kp::sim
