// Text hygiene: instrument replies and user text are stored as received, but
// what leaves the program is clean: JSON gets valid UTF-8 (each invalid byte
// replaced by U+FFFD) and the terminal gets no control characters (escape
// sequences in a reply cannot move the cursor, recolour or retitle it).
#pragma once

#include <string>
#include <string_view>

namespace kp {

// `text` with every byte that does not start or continue a valid UTF-8
// sequence (overlong forms, surrogates and code points above U+10FFFF
// included) replaced by U+FFFD.
std::string ValidUtf8(std::string_view text);

// ValidUtf8(text) with C0 controls (but newline and tab), DEL and C1 controls
// written as "\xNN" (C1 as "\u0080".."\u009f").
std::string TerminalSafe(std::string_view text);

}  // namespace kp
