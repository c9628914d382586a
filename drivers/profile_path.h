// Where instrument profiles may come from: a rig file's `profile` is
// confined to the profile search path (the rig file's folder and below,
// each folder of $KNEEPOINT_PROFILES, the shipped profiles), resolved with
// symlinks followed, and must name a dialect file (.kpd). A rig file cannot
// make the program read, and quote in an error, any other file.
#pragma once

#include <string>
#include <vector>

#include "drivers/status.h"

namespace kp {

// The folders a profile may live in (below), for `base_dir` the rig file's folder.
std::vector<std::string> ProfileSearchRoots(const std::string& base_dir);

// Ok when `path` (as FindProfile returned it) is a .kpd file inside one of
// the roots; else kInvalidInput naming the path, never its contents.
Status ConfineProfilePath(const std::string& path, const std::string& base_dir);

}  // namespace kp
