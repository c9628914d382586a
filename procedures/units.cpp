#include "procedures/units.h"

#include <fmt/format.h>

#include <cmath>

namespace kp {

const char* DimensionName(Dimension d) {
  switch (d) {
    case Dimension::kCurrent:
      return "current";
    case Dimension::kPower:
      return "power";
    case Dimension::kResistance:
      return "resistance";
    case Dimension::kVoltage:
      return "voltage";
    case Dimension::kTime:
      return "time";
    case Dimension::kCharge:
      return "charge";
    case Dimension::kEnergy:
      return "energy";
    case Dimension::kTemperature:
      return "temperature";
    case Dimension::kCRate:
      return "C-rate";
    case Dimension::kPercent:
      return "percentage";
  }
  return "?";
}

const char* UnitsOf(Dimension d) {
  switch (d) {
    case Dimension::kCurrent:
      return "uA, mA, A or a C-rate like 0.2C";
    case Dimension::kPower:
      return "mW, W";
    case Dimension::kResistance:
      return "mOhm, Ohm, kOhm";
    case Dimension::kVoltage:
      return "mV, V";
    case Dimension::kTime:
      return "ms, s, min, h";
    case Dimension::kCharge:
      return "uAh, mAh, Ah";
    case Dimension::kEnergy:
      return "mWh, Wh";
    case Dimension::kTemperature:
      return "degC";
    case Dimension::kCRate:
      return "C";
    case Dimension::kPercent:
      return "%";
  }
  return "?";
}

std::optional<UnitInfo> ParseUnit(std::string_view u) {
  if (u == "C") return UnitInfo{Dimension::kCRate, 1.0};
  if (u == "%") return UnitInfo{Dimension::kPercent, 1.0};
  if (u == "degC") return UnitInfo{Dimension::kTemperature, 1.0};
  if (u == "s") return UnitInfo{Dimension::kTime, 1.0};
  if (u == "ms") return UnitInfo{Dimension::kTime, 1e-3};
  if (u == "min") return UnitInfo{Dimension::kTime, 60.0};
  if (u == "h") return UnitInfo{Dimension::kTime, 3600.0};
  double prefix = 1.0;
  std::string_view base = u;
  if (base.starts_with("\xC2\xB5") || base.starts_with("\xCE\xBC")) {  // µ (micro sign) or μ (Greek mu)
    prefix = 1e-6;
    base.remove_prefix(2);
  } else if (base.size() > 1 && (base[0] == 'u' || base[0] == 'm' || base[0] == 'k')) {
    prefix = base[0] == 'u' ? 1e-6 : base[0] == 'm' ? 1e-3 : 1e3;
    base.remove_prefix(1);
  }
  if (base == "A") return UnitInfo{Dimension::kCurrent, prefix};
  if (base == "W") return UnitInfo{Dimension::kPower, prefix};
  if (base == "Ohm" || base == "\xCE\xA9") return UnitInfo{Dimension::kResistance, prefix};
  if (base == "V") return UnitInfo{Dimension::kVoltage, prefix};
  if (base == "Ah") return UnitInfo{Dimension::kCharge, prefix * 1000.0};  // base is mAh
  if (base == "Wh") return UnitInfo{Dimension::kEnergy, prefix};
  return std::nullopt;
}

std::string FormatQuantity(double v, Dimension d) {
  double a = std::fabs(v);
  switch (d) {
    case Dimension::kCurrent:
      if (a != 0 && a < 1e-3) return fmt::format("{:g} uA", v * 1e6);
      if (a < 1.0) return fmt::format("{:g} mA", v * 1e3);
      return fmt::format("{:g} A", v);
    case Dimension::kPower:
      return a < 1.0 ? fmt::format("{:g} mW", v * 1e3) : fmt::format("{:g} W", v);
    case Dimension::kResistance:
      return a < 1.0 ? fmt::format("{:g} mOhm", v * 1e3) : fmt::format("{:g} Ohm", v);
    case Dimension::kVoltage:
      return fmt::format("{:g} V", v);
    case Dimension::kTime:
      if (a < 1.0) return fmt::format("{:g} ms", v * 1e3);
      if (a >= 3600.0) return fmt::format("{:g} h", v / 3600.0);
      if (a >= 120.0) return fmt::format("{:g} min", v / 60.0);
      return fmt::format("{:g} s", v);
    case Dimension::kCharge:
      return fmt::format("{:g} mAh", v);
    case Dimension::kEnergy:
      return fmt::format("{:g} Wh", v);
    case Dimension::kTemperature:
      return fmt::format("{:g} degC", v);
    case Dimension::kCRate:
      return fmt::format("{:g}C", v);
    case Dimension::kPercent:
      return fmt::format("{:g}%", v);
  }
  return fmt::format("{:g}", v);
}

}  // namespace kp
