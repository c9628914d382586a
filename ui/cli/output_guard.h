// Output guard: files that commands write (report --html/--csv, export,
// compare) are never written over the database they read, its WAL/SHM/journal
// files, any other SQLite database or a rig lock, nor over each other. Called
// at the top of those commands, before anything is opened.
#pragma once

#include <string>
#include <vector>

#include "drivers/status.h"

namespace kp::cli {

// kInvalidInput (exit 2) naming the output and what it would overwrite;
// empty paths are skipped.
Status CheckOutputPaths(const std::string& db_path, const std::vector<std::string>& outputs);

}  // namespace kp::cli
