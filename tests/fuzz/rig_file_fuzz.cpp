// libFuzzer entry point for the rig file loader (TOML): any bytes give a rig
// description or an error naming the file — never a crash or a sanitizer
// report. Profiles named in the text resolve against the shipped ones; nothing
// is opened. The corpus replay (fuzz_replay.cpp) runs it on every build.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string>
#include <string_view>

#include "rig/rig_file.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  std::string_view text(reinterpret_cast<const char*>(data), size);
  kp::Result<kp::RigFileSpec> r = kp::ParseRigFile(text, "fuzz-rig.toml");
  if (!r.ok() && r.status().message().find("fuzz-rig.toml") == std::string::npos) std::abort();
  return 0;
}
