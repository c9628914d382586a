// Where Kneepoint's shipped data files are found at run time: instrument
// dialects, simulated-cell presets, the procedure library and example rig
// files. Nothing is compiled in as an absolute source path, so a copied or
// installed binary finds its own files:
//   1. $KNEEPOINT_DATA_DIR, when set (a folder laid out like share/kneepoint);
//   2. <folder of the running program>/../share/kneepoint   (installed: /usr/bin -> /usr/share/kneepoint);
//   3. <folder of the running program>/share/kneepoint      (the build tree: CMake links the source folders there);
//   4. <folder of the running program>/../../share/kneepoint (programs in the
//      build tree's nested test folders, build/tests/bench/...).
// The first that exists wins. Layout: profiles/, presets/, procedures/, rigs/.
#pragma once

#include <filesystem>
#include <optional>

namespace kp {

// The folder holding the running program (from /proc/self/exe); empty when
// it cannot be read.
std::filesystem::path ProgramDir();

// The data folder by the rules above; nullopt when none exists.
std::optional<std::filesystem::path> DataDir();

// DataDir() / sub, when that folder exists.
std::optional<std::filesystem::path> DataSubdir(const std::filesystem::path& sub);

}  // namespace kp
