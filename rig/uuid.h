// Run identifiers that stay unique when databases are copied together:
// random (version 4) UUIDs per RFC 9562, drawn from the kernel's random
// source (getrandom), never from a seeded generator.
#pragma once

#include <string>
#include <string_view>

#include "drivers/status.h"

namespace kp {

// "xxxxxxxx-xxxx-4xxx-yxxx-xxxxxxxxxxxx" in lower case (y is 8, 9, a or b).
Result<std::string> NewUuidV4();
// True for the 36-character hyphenated form (any version, either case).
bool LooksLikeUuid(std::string_view text);

}  // namespace kp
