#include "drivers/chamber.h"

#include <cmath>

#include <fmt/format.h>

#include "drivers/roles.h"

namespace kp {

Status ChamberDriver::SetTemperature(double celsius) {
  if (!std::isfinite(celsius)) return InvalidInput("chamber set point is not a number");
  if (limits_.min_c && celsius < *limits_.min_c)
    return LimitExceeded(fmt::format("{}: chamber set point {:.1f} degC is below the limit {:.1f} degC", session_.address(), celsius,
                                     *limits_.min_c));
  if (limits_.max_c && celsius > *limits_.max_c)
    return LimitExceeded(fmt::format("{}: chamber set point {:.1f} degC is above the limit {:.1f} degC", session_.address(), celsius,
                                     *limits_.max_c));
  if (cmd_.set_temperature.empty()) return InvalidInput(fmt::format("{}: the dialect has no chamber set-point command", session_.address()));
  std::string line = cmd_.set_temperature;
  if (size_t pos = line.find("{}"); pos != std::string::npos) line.replace(pos, 2, FormatNr3(celsius));
  return session_.Write(line);
}

Status ChamberDriver::Run(bool on) {
  const std::string& c = on ? cmd_.run_on : cmd_.run_off;
  if (c.empty()) return Status::Ok();  // a chamber that always runs
  return session_.Write(c);
}

Result<double> ChamberDriver::ReadTemperature() {
  KP_ASSIGN_OR_RETURN(double t, ReadFiniteNumber(session_, cmd_.read_temperature, "chamber temperature"));
  if (limits_.max_c && t > *limits_.max_c + limits_.alarm_margin_c)
    return LimitExceeded(fmt::format("{}: chamber reads {:.1f} degC, more than {:.1f} degC above its limit {:.1f} degC", session_.address(),
                                     t, limits_.alarm_margin_c, *limits_.max_c));
  if (limits_.min_c && t < *limits_.min_c - limits_.alarm_margin_c)
    return LimitExceeded(fmt::format("{}: chamber reads {:.1f} degC, more than {:.1f} degC below its limit {:.1f} degC", session_.address(),
                                     t, limits_.alarm_margin_c, *limits_.min_c));
  return t;
}

SoakJudge::State SoakJudge::OnReading(double t_s, double temperature_c) {
  if (state_ != State::kSettling) return state_;
  if (std::abs(temperature_c - spec_.setpoint_c) <= spec_.band_c) {
    if (!in_band_since_s_) in_band_since_s_ = t_s;
    if (t_s - *in_band_since_s_ >= spec_.hold_s) return state_ = State::kStable;
  } else {
    in_band_since_s_.reset();
  }
  if (t_s - start_s_ >= spec_.max_s) state_ = State::kTimedOut;
  return state_;
}

std::string SoakJudge::Describe() const {
  switch (state_) {
    case State::kStable:
      return fmt::format("stable at {:.1f} degC ±{:.1f} for {:.0f} s (in band from {:.0f} s)", spec_.setpoint_c, spec_.band_c, spec_.hold_s,
                         *in_band_since_s_);
    case State::kTimedOut:
      return fmt::format("not stable at {:.1f} degC ±{:.1f} for {:.0f} s within {:.0f} s", spec_.setpoint_c, spec_.band_c, spec_.hold_s,
                         spec_.max_s);
    case State::kSettling: break;
  }
  return fmt::format("settling towards {:.1f} degC ±{:.1f}", spec_.setpoint_c, spec_.band_c);
}

}  // namespace kp
