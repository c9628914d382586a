#include "rig/version.h"

#include "rig/build_version.h"  // generated: build/generated/rig/build_version.h

namespace kp {

const char* SoftwareVersion() { return KP_SOFTWARE_VERSION; }

std::string BuildCommit() {
  std::string c = KP_BUILD_COMMIT;
  if (KP_BUILD_DIRTY && c != "unknown") c += "-dirty";
  return c;
}

std::string VersionLine() {
  std::string commit = KP_BUILD_COMMIT;
  std::string line = std::string("kneepoint ") + KP_SOFTWARE_VERSION;
  if (commit == "unknown") return line + " (commit unknown)";
  return line + " (commit " + commit.substr(0, 12) + (KP_BUILD_DIRTY ? ", modified tree)" : ")");
}

}  // namespace kp
