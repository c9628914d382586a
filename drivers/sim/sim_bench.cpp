#include "drivers/sim/sim_bench.h"

#include <algorithm>
#include <cmath>
#include <fmt/format.h>

#include "drivers/scpi_syntax.h"

namespace kp::sim {

// One simulated instrument: common IEEE 488.2 commands and an error queue,
// plus the role-specific headers.
class SimBench::Device final : public LineDevice {
 public:
  enum class Role { kLoad, kMeter, kThermometer };
  Device(SimBench& bench, Role role) : bench_(bench), role_(role) {}

  std::optional<std::string> HandleLine(std::string_view line) override {
    std::lock_guard<std::mutex> lock(bench_.mu_);
    bench_.AdvanceLocked();
    ScpiCommand c = SplitScpiCommand(line);
    const std::string& h = c.header;
    if (h.empty()) return std::nullopt;
    if (ScpiHeaderMatches("*IDN?", h)) return Identity();
    if (ScpiHeaderMatches("*RST", h)) {
      if (role_ == Role::kLoad) ResetLoad();
      return std::nullopt;
    }
    if (ScpiHeaderMatches("*CLS", h)) {
      errors_.clear();
      return std::nullopt;
    }
    if (ScpiHeaderMatches("*OPC?", h)) return std::string("1");
    if (ScpiHeaderMatches("*ESR?", h) || ScpiHeaderMatches("*STB?", h)) return std::string("0");
    if (ScpiHeaderMatches("SYSTem:ERRor[:NEXT]?", h)) {
      if (errors_.empty()) return std::string("0,\"No error\"");
      std::string e = errors_.front();
      errors_.pop_front();
      return e;
    }
    std::optional<std::string> reply;
    bool handled = false;
    switch (role_) {
      case Role::kLoad: handled = HandleLoad(c, reply); break;
      case Role::kMeter: handled = HandleMeter(c, reply); break;
      case Role::kThermometer: handled = HandleThermometer(c, reply); break;
    }
    if (!handled) PushError(-113, "Undefined header");
    return reply;
  }

 private:
  std::string Identity() const {
    switch (role_) {
      case Role::kLoad: return "Kneepoint Simulation,KP-SIM-LOAD,SN0001,1.0";
      case Role::kMeter: return "Kneepoint Simulation,KP-SIM-METER,SN0002,1.0";
      case Role::kThermometer: return "Kneepoint Simulation,KP-SIM-TEMP,SN0003,1.0";
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
  }

  bool HandleLoad(const ScpiCommand& c, std::optional<std::string>& reply) {
    const std::string& h = c.header;
    SimBench& b = bench_;
    if (ScpiHeaderMatches("[SOURce:]FUNCtion", h)) {
      if (c.args.size() != 1) return PushError(-109, "Missing parameter"), true;
      if (ScpiHeaderMatches("CURRent", c.args[0])) b.mode_ = LoadMode::kCurrent;
      else if (ScpiHeaderMatches("RESistance", c.args[0])) b.mode_ = LoadMode::kResistance;
      else if (ScpiHeaderMatches("POWer", c.args[0])) b.mode_ = LoadMode::kPower;
      else PushError(-224, "Illegal parameter value");
      return true;
    }
    if (ScpiHeaderMatches("[SOURce:]FUNCtion?", h)) {
      reply = b.mode_ == LoadMode::kCurrent ? "CURR" : b.mode_ == LoadMode::kResistance ? "RES" : "POW";
      return true;
    }
    if (ScpiHeaderMatches("[SOURce:]CURRent[:LEVel][:IMMediate][:AMPLitude]", h)) {
      if (auto v = Number(c, 0.0, b.options_.load_max_current_a)) b.level_current_a_ = *v;
      return true;
    }
    if (ScpiHeaderMatches("[SOURce:]CURRent[:LEVel][:IMMediate][:AMPLitude]?", h)) {
      reply = FormatNr3(b.level_current_a_);
      return true;
    }
    if (ScpiHeaderMatches("[SOURce:]RESistance[:LEVel][:IMMediate][:AMPLitude]", h)) {
      if (auto v = Number(c, 1e-3, 1e7)) b.level_resistance_ohm_ = *v;
      return true;
    }
    if (ScpiHeaderMatches("[SOURce:]POWer[:LEVel][:IMMediate][:AMPLitude]", h)) {
      if (auto v = Number(c, 0.0, 1000.0)) b.level_power_w_ = *v;
      return true;
    }
    if (ScpiHeaderMatches("[SOURce:]VOLTage:PROTection:LOW", h)) {
      if (auto v = Number(c, 0.0, 100.0)) b.uv_protect_v_ = *v;
      return true;
    }
    if (ScpiHeaderMatches("INPut[:STATe]", h)) {
      if (c.args.size() != 1) return PushError(-109, "Missing parameter"), true;
      const std::string& a = c.args[0];
      if (a == "1" || ScpiHeaderMatches("ON", a)) b.input_on_ = true;
      else if (a == "0" || ScpiHeaderMatches("OFF", a)) b.input_on_ = false;
      else PushError(-224, "Illegal parameter value");
      return true;
    }
    if (ScpiHeaderMatches("INPut[:STATe]?", h)) {
      reply = b.input_on_ ? "1" : "0";
      return true;
    }
    if (ScpiHeaderMatches("MEASure[:SCALar]:VOLTage[:DC]?", h)) {
      reply = FormatNr3(TerminalVoltage());
      return true;
    }
    if (ScpiHeaderMatches("MEASure[:SCALar]:CURRent[:DC]?", h)) {
      reply = FormatNr3(b.CurrentLocked());
      return true;
    }
    if (ScpiHeaderMatches("MEASure[:SCALar]:POWer[:DC]?", h)) {
      reply = FormatNr3(b.CurrentLocked() * TerminalVoltage());
      return true;
    }
    return false;
  }

  double TerminalVoltage() {
    Thevenin t = bench_.cell_.Equivalent();
    return t.emf_v - bench_.CurrentLocked() * t.r_ohm;
  }

  bool HandleMeter(const ScpiCommand& c, std::optional<std::string>& reply) {
    if (ScpiHeaderMatches("MEASure[:SCALar]:VOLTage[:DC]?", c.header)) {
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

  bool HandleThermometer(const ScpiCommand& c, std::optional<std::string>& reply) {
    if (ScpiHeaderMatches("MEASure[:SCALar]:TEMPerature[:DC]?", c.header)) {
      reply = FormatNr3(bench_.cell_.temperature_c());
      return true;
    }
    return false;
  }

  SimBench& bench_;
  Role role_;
  std::deque<std::string> errors_;
};

SimBench::SimBench(CellParams cell, Clock& clock, SimOptions options)
    : cell_(std::move(cell)), clock_(clock), options_(options), sim_time_(clock.Now()), rng_(options.seed) {
  load_ = std::make_unique<Device>(*this, Device::Role::kLoad);
  meter_ = std::make_unique<Device>(*this, Device::Role::kMeter);
  thermometer_ = std::make_unique<Device>(*this, Device::Role::kThermometer);
}

SimBench::~SimBench() = default;

LineDevice& SimBench::load() { return *load_; }
LineDevice& SimBench::meter() { return *meter_; }
LineDevice& SimBench::thermometer() { return *thermometer_; }

bool SimBench::load_input_on() const {
  std::lock_guard<std::mutex> lock(mu_);
  return input_on_;
}
double SimBench::load_current_a() const {
  std::lock_guard<std::mutex> lock(mu_);
  return CurrentLocked();
}
double SimBench::cell_soc() const {
  std::lock_guard<std::mutex> lock(mu_);
  return cell_.soc();
}
double SimBench::cell_temperature_c() const {
  std::lock_guard<std::mutex> lock(mu_);
  return cell_.temperature_c();
}

double SimBench::CurrentLocked() const {
  if (!input_on_) return 0.0;
  Thevenin t = cell_.Equivalent();
  if (t.emf_v <= 0) return 0.0;
  double i = 0.0;
  switch (mode_) {
    case LoadMode::kCurrent: i = level_current_a_; break;
    case LoadMode::kResistance: i = t.emf_v / (t.r_ohm + level_resistance_ohm_); break;
    case LoadMode::kPower: {
      // I·(E - I·R) = P  ->  R·I² - E·I + P = 0, smaller root; beyond the
      // maximum-power point the load gets E/(2R).
      double disc = t.emf_v * t.emf_v - 4.0 * t.r_ohm * level_power_w_;
      i = disc >= 0 ? (t.emf_v - std::sqrt(disc)) / (2.0 * t.r_ohm) : t.emf_v / (2.0 * t.r_ohm);
      break;
    }
  }
  // A load cannot pull the terminal below 0 V.
  i = std::min(i, t.emf_v / t.r_ohm);
  // Hardware under-voltage backstop: the load stops sinking below the limit.
  if (uv_protect_v_ > 0 && t.emf_v - i * t.r_ohm < uv_protect_v_) i = std::max(0.0, (t.emf_v - uv_protect_v_) / t.r_ohm);
  return std::max(0.0, i);
}

void SimBench::AdvanceLocked() {
  Seconds now = clock_.Now();
  while (sim_time_ < now) {
    double dt = std::min(options_.max_step_s, (now - sim_time_).count());
    double extra = 0.0;
    if (options_.runaway_start_s >= 0 && sim_time_.count() >= options_.runaway_start_s) {
      extra = options_.runaway_heat_rate_w_per_s * (sim_time_.count() - options_.runaway_start_s);
    }
    cell_.Advance(dt, CurrentLocked(), extra);
    sim_time_ += Seconds(dt);
  }
}

}  // namespace kp::sim
