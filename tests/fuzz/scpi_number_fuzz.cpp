// libFuzzer entry point for the SCPI reply side: the number parser, the
// header matcher and the command splitter. Any bytes must give a value or an
// error with a message — never a crash, a non-finite "finite" number or a
// sanitizer report. The corpus replay (fuzz_replay.cpp) runs it on every build.
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string>
#include <string_view>

#include "drivers/scpi_syntax.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  std::string_view text(reinterpret_cast<const char*>(data), size);
  kp::Result<kp::ScpiNumber> n = kp::ParseScpiNumber(text);
  if (n.ok()) {
    if (n->finite() && !std::isfinite(n->value)) std::abort();
    if (n->finite()) {
      // What we format we must read back.
      kp::Result<kp::ScpiNumber> back = kp::ParseScpiNumber(kp::FormatNr3(n->value));
      if (!back.ok() || !back->finite()) std::abort();
    }
  } else if (n.status().message().empty()) {
    std::abort();
  }
  // The first line is a pattern, the rest a header: neither may crash the matcher.
  size_t nl = text.find('\n');
  if (nl != std::string_view::npos) {
    (void)kp::ScpiHeaderMatches(text.substr(0, nl), text.substr(nl + 1));
  }
  kp::ScpiCommand c = kp::SplitScpiCommand(text);
  for (const std::string& a : c.args) (void)kp::ParseScpiNumber(a);
  return 0;
}
