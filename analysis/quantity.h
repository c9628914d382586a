// Quantities written with units ("40uA", "2000mAh", "2%/month", "0.5s"), as
// the command line and profile files take them. Pure parsing, no I/O.
#pragma once

#include <optional>
#include <string>
#include <string_view>

namespace kp {

enum class QuantityKind {
  kCurrent,       // A, mA, uA (µA), nA     -> amperes
  kCharge,        // Ah, mAh, uAh, C        -> mAh
  kDuration,      // s, ms, min, h, d       -> seconds
  kFraction,      // %, or a plain number 0..1 -> fraction
  kRatePerMonth,  // %/month, %/year, %/day -> fraction per month (30.4375 days)
};

struct ParsedQuantity {
  std::optional<double> value;  // in the kind's base unit
  std::string error;            // names the offending text
  size_t error_column = 0;      // 1-based column inside the text
};

ParsedQuantity ParseQuantity(std::string_view text, QuantityKind kind);

}  // namespace kp
