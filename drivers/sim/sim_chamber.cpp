#include "drivers/sim/sim_chamber.h"

#include <cmath>

#include <fmt/format.h>

#include "drivers/scpi_syntax.h"
#include "drivers/sim/sim_bench.h"

namespace kp::sim {

SimChamber::SimChamber(Clock& clock, SimChamberOptions options, SimBench* bench)
    : clock_(clock), options_(options), bench_(bench), last_(clock.Now()), temperature_c_(options.room_c), setpoint_c_(options.room_c) {}

void SimChamber::AdvanceLocked() {
  Seconds now = clock_.Now();
  double dt = (now - last_).count();
  if (dt <= 0) return;
  last_ = now;
  double target = running_ ? setpoint_c_ : options_.room_c;
  temperature_c_ = target + (temperature_c_ - target) * std::exp(-dt / options_.tau_s);
  if (bench_ != nullptr) bench_->SetAmbient(temperature_c_);
}

double SimChamber::temperature_c() {
  std::lock_guard<std::mutex> lock(mu_);
  AdvanceLocked();
  return temperature_c_;
}

bool SimChamber::running() const {
  std::lock_guard<std::mutex> lock(mu_);
  return running_;
}

std::optional<std::string> SimChamber::HandleLine(std::string_view line) {
  std::lock_guard<std::mutex> lock(mu_);
  AdvanceLocked();
  ScpiCommand c = SplitScpiCommand(line);
  const std::string& h = c.header;
  auto is = [&](const char* pattern) { return ScpiHeaderMatches(pattern, h); };
  auto push = [&](int code, const char* text) {
    if (errors_.size() < 10) errors_.push_back(fmt::format("{},\"{}\"", code, text));
  };
  if (h.empty()) return std::nullopt;
  if (is("*IDN?")) return std::string("Kneepoint Simulation,KP-SIM-CHAMBER,SN0005,1.0");
  if (is("*OPC?")) return std::string("1");
  if (is("*CLS")) {
    errors_.clear();
    return std::nullopt;
  }
  if (is("*RST")) {
    running_ = false;
    setpoint_c_ = options_.room_c;
    return std::nullopt;
  }
  if (is("SYSTem:ERRor[:NEXT]?")) {
    if (errors_.empty()) return std::string("0,\"No error\"");
    std::string e = errors_.front();
    errors_.pop_front();
    return e;
  }
  if (is("SYSTem:REMote") || is("SYSTem:LOCal")) return std::nullopt;
  if (is("TEMPerature:SETPoint")) {
    Result<ScpiNumber> n = c.args.size() == 1 ? ParseScpiNumber(c.args[0]) : Result<ScpiNumber>(InvalidInput("missing"));
    if (!n.ok() || !n->finite()) push(-109, "Missing parameter");
    else if (n->value < options_.min_c || n->value > options_.max_c) push(-222, "Data out of range");
    else setpoint_c_ = n->value;
    return std::nullopt;
  }
  if (is("TEMPerature:SETPoint?")) return FormatNr3(setpoint_c_);
  if (is("MEASure:TEMPerature?")) return FormatNr3(temperature_c_);
  if (is("OUTPut[:STATe]")) {
    if (c.args.size() == 1 && (c.args[0] == "1" || ScpiHeaderMatches("ON", c.args[0]))) running_ = true;
    else if (c.args.size() == 1 && (c.args[0] == "0" || ScpiHeaderMatches("OFF", c.args[0]))) running_ = false;
    else push(-224, "Illegal parameter value");
    return std::nullopt;
  }
  if (is("OUTPut[:STATe]?")) return std::string(running_ ? "1" : "0");
  push(-113, "Undefined header");
  return std::nullopt;
}

}  // namespace kp::sim
