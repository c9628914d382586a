// Child processes the panel starts: `kneepoint check` (output captured, shown
// before a run starts) and `kneepoint run` (detached, so the runner outlives
// the panel). POSIX only. Not for the UI thread when waiting: CaptureOutput
// blocks until the child exits.
#pragma once

#include <string>
#include <vector>

#include "drivers/status.h"

namespace kp::ui {

// Path of the running executable (/proc/self/exe), to start sibling commands.
std::string SelfExecutable();

struct Captured {
  int exit_code = -1;
  std::string output;  // stdout and stderr interleaved
};
// Runs argv[0] with arguments, waits, and returns its exit code and output.
Result<Captured> CaptureOutput(const std::vector<std::string>& argv);

// Starts argv in a new session, detached from the panel (double fork), with
// stdout/stderr appended to `log_path`. Returns the runner's pid.
Result<int> SpawnDetached(const std::vector<std::string>& argv, const std::string& log_path);

}  // namespace kp::ui
