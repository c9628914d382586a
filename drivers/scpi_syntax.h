// SCPI text rules shared by the session (parsing replies) and the simulated
// instruments (parsing commands): numbers, keywords and headers.
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include "drivers/status.h"

namespace kp {

// A numeric reply. SCPI-99 Vol 1 §7.2.1 reserves 9.9E37 for +infinity /
// over-range, -9.9E37 for -infinity and 9.91E37 for not-a-number.
struct ScpiNumber {
  enum class Kind { kFinite, kOverflow, kUnderflow, kNotANumber };
  Kind kind = Kind::kFinite;
  double value = 0.0;  // meaningful only for kFinite
  bool finite() const { return kind == Kind::kFinite; }
};

// Parses one numeric response: NR1 ("42", "+42"), NR2 ("3.712", "-.5"),
// NR3 ("+3.71200E+00"), with optional surrounding white space. Rejects units,
// trailing text, empty input, hex/inf/nan spellings and values beyond double.
Result<ScpiNumber> ParseScpiNumber(std::string_view text);

// Formats a value as NR3 with 6 significant digits: "+3.71200E+00".
std::string FormatNr3(double value);

// True when `header` (as sent, e.g. "sour:curr:lev", ":MEAS:VOLT?") matches
// `pattern` written in the SCPI manual style, e.g.
// "[SOURce:]CURRent[:LEVel][:IMMediate][:AMPLitude]" or "MEASure:VOLTage[:DC]?".
// Keywords match their short form (the uppercase part) or long form, case-
// insensitively; bracketed nodes may be omitted; a trailing '?' must agree.
bool ScpiHeaderMatches(std::string_view pattern, std::string_view header);

// Splits "SOUR:CURR 0.5" into header "SOUR:CURR" and arguments ["0.5"]
// (comma-separated, trimmed). Leading/trailing white space is ignored.
struct ScpiCommand {
  std::string header;
  std::vector<std::string> args;
};
ScpiCommand SplitScpiCommand(std::string_view line);

}  // namespace kp
