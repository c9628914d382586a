// Size limits for the text files Kneepoint reads (procedures, rig files,
// instrument profiles, cell files). Real files are a few kilobytes with short
// lines; anything far beyond that is a wrong file (a log, a binary, a
// database) and is refused with a message naming where, before any parsing.
// Pure functions, thread-safe.
#pragma once

#include <cstddef>
#include <string>
#include <string_view>

#include "drivers/status.h"

namespace kp {

inline constexpr size_t kMaxTextFileBytes = 1024 * 1024;  // 1 MiB
inline constexpr size_t kMaxTextLineBytes = 4096;

// Ok, or kInvalidInput naming "file:1:1" for a text over kMaxTextFileBytes,
// or "file:LINE:COL" (COL = kMaxTextLineBytes + 1) for the first line longer
// than kMaxTextLineBytes.
Status CheckTextLimits(std::string_view text, std::string_view file);

// Reads a whole text file after checking its size on disk (so a huge file is
// never loaded) and then CheckTextLimits. `what` names the kind of file in
// messages ("rig file", "profile").
Result<std::string> ReadLimitedTextFile(const std::string& path, std::string_view what);

}  // namespace kp
