// Quantities with units: the one parser used by procedure files, rig files and
// every command-line option (procedures/LANGUAGE.md, "Numbers and units", is
// the reference). A number is followed by its unit, with or without a space
// ("2500mAh", "600 mA", "15uA", "3.9Ohm", "0.2C", "0.2It", "60°C"); durations
// may be compound ("1h30min", "1:30:00"). Unit letters are read without regard
// to case ("2.5v", "0.6a", "MAH") except that the SI spellings of the mega
// prefix ("MA", "MV", "MW", "MOhm", "MAh", "MWh") are refused: no bench setting
// is in mega-units, so they are typos for milli and the message says so.
// Conversion to the SI base used in Plan names lives here only. Pure functions.
#pragma once

#include <optional>
#include <string>
#include <string_view>

namespace kp {

enum class Dimension {
  kCurrent,       // A
  kPower,         // W
  kResistance,    // Ohm
  kVoltage,       // V
  kTime,          // s
  kCharge,        // mAh (Plan keeps charge in mAh)
  kEnergy,        // Wh
  kTemperature,   // degC
  kCRate,         // multiples of rated capacity per hour ("0.2C", "0.2It")
  kPercent,       // "10%" (of rated capacity, where a charge is expected)
  kFraction,      // a ratio: "40%" or a bare number ("0.4"); base: fraction
  kRatePerMonth,  // "2%/month", "10%/year", "0.1%/day"; base: fraction per month (30.44 days)
};
const char* DimensionName(Dimension d);

struct UnitInfo {
  Dimension dimension;
  double scale;  // multiply the written number by this to get the base unit
};

// A unit suffix looked up; `error` explains a refusal (mega prefix, "m").
struct UnitLookup {
  std::optional<UnitInfo> info;
  std::string error;
};
// Prefixes n, u/µ/μ, m, k on A, W, Ohm (Ω), V, Ah, Wh; time ms, s, min, h, d;
// temperature degC or °C; "C" and "It" (C-rate) and "%" take no prefix.
UnitLookup LookUpUnit(std::string_view unit);
std::optional<UnitInfo> ParseUnit(std::string_view unit);

// A number and its unit scanned from text.
struct ScannedQuantity {
  size_t end = 0;        // index just past the quantity (and its unit)
  double number = 0.0;   // as written; a compound duration is its total in seconds
  std::string unit;      // as written, "" for a bare number ("s" for compound durations)
  std::string text;      // the whole quantity as written
  std::string error;     // set when the text is malformed
  size_t error_pos = 0;  // index of the problem in the scanned text
};
// Scans the quantity starting at text[pos] (a digit, or '-'/'.' before a
// digit): the number (with optional exponent), then the unit either attached
// or after spaces (only when what follows is a known unit), compound
// durations ("1h30min", "2d12h") and clock durations ("1:30:00", h:mm:ss).
ScannedQuantity ScanQuantity(std::string_view text, size_t pos = 0);

// What a conversion may need: the cell's rated capacity for C-rates and %.
struct QuantityContext {
  std::optional<double> rated_mah;
};

struct ConvertedQuantity {
  std::optional<double> value;  // in the base unit of the dimension wanted
  std::string error;
};
// Converts a scanned number and unit to `want`'s base unit. `what` names the
// value in messages ("the rated capacity", "--brownout"). A bare number is an
// error with a hint ("'3000' has no unit: did you mean 3000mAh?") except for
// kFraction, where it is the ratio itself.
ConvertedQuantity ConvertQuantity(const ScannedQuantity& q, Dimension want, std::string_view what,
                                  const QuantityContext& ctx = {});

// A whole text as one quantity, as command-line options and rig-file strings
// take it: surrounding spaces ignored, nothing may follow. Refuses NaN,
// infinity, negative values (but temperatures) and values past any bench (10 kA, 1e9 mAh, 1e10 s,
// 1e9 of anything else). `error_column` is 1-based inside `text`.
struct ParsedQuantity {
  std::optional<double> value;
  std::string error;
  size_t error_column = 0;
};
ParsedQuantity ParseQuantityText(std::string_view text, Dimension want, std::string_view what = {},
                                 const QuantityContext& ctx = {});

// "'3000' has no unit: did you mean 3000mAh?" for a bare number.
std::string BareNumberHint(std::string_view number, Dimension want);

// A short list of the accepted units of a dimension, for error messages.
const char* UnitsOf(Dimension d);

// Formats a value in its base unit with a readable prefix ("500 mA", "1.5 s").
std::string FormatQuantity(double value, Dimension d);

}  // namespace kp
