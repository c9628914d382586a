// The software's version and the source commit it was built from, as stored
// with every run and printed by `kneepoint --version`. The numbers come from
// project(VERSION) in CMakeLists.txt and `git describe`/`git rev-parse HEAD`,
// written into a generated header at each build (rig/version.cmake).
#pragma once

#include <string>

namespace kp {

// "0.1.0": project(VERSION) of CMakeLists.txt.
const char* SoftwareVersion();
// The full commit hash the binary was built from, with "-dirty" appended when
// the working tree had uncommitted changes; "unknown" outside a git checkout.
std::string BuildCommit();
// "kneepoint 0.1.0 (commit 67ab689c1f2e, modified tree)".
std::string VersionLine();

}  // namespace kp
