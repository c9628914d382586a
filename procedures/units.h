// Quantities with units, as written in procedure files: a number followed at
// once by a unit with an optional SI prefix ("2500mAh", "15uA", "3.9Ohm",
// "0.2C"). Conversion to the SI base used in Plan names lives here only.
#pragma once

#include <optional>
#include <string>
#include <string_view>

namespace kp {

enum class Dimension {
  kCurrent,      // A
  kPower,        // W
  kResistance,   // Ohm
  kVoltage,      // V
  kTime,         // s
  kCharge,       // mAh (Plan keeps charge in mAh)
  kEnergy,       // Wh
  kTemperature,  // degC
  kCRate,        // multiples of rated capacity per hour ("0.2C")
  kPercent,      // "10%" (of rated capacity, where a charge is expected)
};
const char* DimensionName(Dimension d);

struct UnitInfo {
  Dimension dimension;
  double scale;  // multiply the written number by this to get the base unit
};

// Parses a unit suffix: prefixes u/µ (micro), m (milli), k (kilo) on A, W,
// Ohm (or Ω), V, Ah, Wh; time is ms, s, min, h; temperature degC; "C" and "%"
// take no prefix. Returns nullopt for anything else.
std::optional<UnitInfo> ParseUnit(std::string_view unit);

// A short list of the accepted units of a dimension, for error messages.
const char* UnitsOf(Dimension d);

// Formats a value in its base unit with a readable prefix ("500 mA", "1.5 s").
std::string FormatQuantity(double value, Dimension d);

}  // namespace kp
