#include "rig/uuid.h"

#include <sys/random.h>

#include <cctype>
#include <cerrno>
#include <cstring>

#include <fmt/format.h>

namespace kp {

Result<std::string> NewUuidV4() {
  unsigned char b[16];
  size_t got = 0;
  while (got < sizeof b) {
    ssize_t n = getrandom(b + got, sizeof b - got, 0);
    if (n < 0) {
      if (errno == EINTR) continue;
      return IoError(fmt::format("no random bytes for a run id: {}", std::strerror(errno)));
    }
    got += static_cast<size_t>(n);
  }
  // RFC 9562 section 5.4: version 4 in the high nibble of octet 6, variant 10 in
  // the two high bits of octet 8.
  b[6] = static_cast<unsigned char>((b[6] & 0x0F) | 0x40);
  b[8] = static_cast<unsigned char>((b[8] & 0x3F) | 0x80);
  std::string out;
  out.reserve(36);
  static const char* kHex = "0123456789abcdef";
  for (size_t i = 0; i < sizeof b; ++i) {
    if (i == 4 || i == 6 || i == 8 || i == 10) out += '-';
    out += kHex[b[i] >> 4];
    out += kHex[b[i] & 0x0F];
  }
  return out;
}

bool LooksLikeUuid(std::string_view t) {
  if (t.size() != 36) return false;
  for (size_t i = 0; i < t.size(); ++i) {
    const bool dash = i == 8 || i == 13 || i == 18 || i == 23;
    if (dash ? t[i] != '-' : !std::isxdigit(static_cast<unsigned char>(t[i]))) return false;
  }
  return true;
}

}  // namespace kp
