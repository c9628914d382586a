#include "drivers/text_hygiene.h"

#include <fmt/format.h>

namespace kp {
namespace {

// Length of the valid UTF-8 sequence at `s[i]` and its code point; 0 when invalid.
size_t SequenceAt(std::string_view s, size_t i, char32_t& cp) {
  const auto b = [&](size_t k) { return static_cast<unsigned char>(s[k]); };
  const unsigned char c = b(i);
  if (c < 0x80) {
    cp = c;
    return 1;
  }
  size_t n = 0;
  char32_t min = 0;
  if ((c & 0xE0) == 0xC0) n = 2, cp = c & 0x1F, min = 0x80;
  else if ((c & 0xF0) == 0xE0) n = 3, cp = c & 0x0F, min = 0x800;
  else if ((c & 0xF8) == 0xF0) n = 4, cp = c & 0x07, min = 0x10000;
  else return 0;
  if (i + n > s.size()) return 0;
  for (size_t k = 1; k < n; ++k) {
    if ((b(i + k) & 0xC0) != 0x80) return 0;
    cp = (cp << 6) | (b(i + k) & 0x3F);
  }
  if (cp < min || cp > 0x10FFFF || (cp >= 0xD800 && cp <= 0xDFFF)) return 0;
  return n;
}

}  // namespace

std::string ValidUtf8(std::string_view s) {
  std::string out;
  out.reserve(s.size());
  for (size_t i = 0; i < s.size();) {
    char32_t cp = 0;
    size_t n = SequenceAt(s, i, cp);
    if (n == 0) {
      out += "\xEF\xBF\xBD";
      ++i;
    } else {
      out.append(s.substr(i, n));
      i += n;
    }
  }
  return out;
}

std::string TerminalSafe(std::string_view s) {
  std::string out;
  out.reserve(s.size());
  for (size_t i = 0; i < s.size();) {
    char32_t cp = 0;
    size_t n = SequenceAt(s, i, cp);
    if (n == 0) {
      out += "\xEF\xBF\xBD";
      ++i;
      continue;
    }
    if ((cp < 0x20 && cp != '\n' && cp != '\t') || cp == 0x7F) {
      out += fmt::format("\\x{:02x}", static_cast<unsigned>(cp));
    } else if (cp >= 0x80 && cp <= 0x9F) {
      out += fmt::format("\\u{:04x}", static_cast<unsigned>(cp));
    } else {
      out.append(s.substr(i, n));
    }
    i += n;
  }
  return out;
}

}  // namespace kp
