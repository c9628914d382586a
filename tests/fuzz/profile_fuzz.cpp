// libFuzzer entry point for the instrument dialect loader (.kpd, TOML): any bytes
// give a profile or an error naming the file — never a crash or a sanitizer
// report. The corpus replay (fuzz_replay.cpp) runs it on every build.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string>
#include <string_view>

#include "drivers/profile.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  std::string_view text(reinterpret_cast<const char*>(data), size);
  kp::Result<kp::InstrumentProfile> p = kp::ParseProfile(text, "fuzz.kpd");
  if (!p.ok()) {
    if (p.status().message().find("fuzz.kpd") == std::string::npos) std::abort();
    return 0;
  }
  kp::ApplyChannel(*p, "7");
  (void)kp::IdentityMatches(p->identity, "ACME,LOAD,1,2");
  return 0;
}
