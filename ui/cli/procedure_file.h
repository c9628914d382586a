// Reading a procedure file for the `check` and `run` commands.
#pragma once

#include <string>

#include "drivers/status.h"
#include "procedures/plan.h"

namespace kp::cli {

// The file's text (kNotFound when missing, kInvalidInput when not text).
Result<std::string> ReadProcedureText(const std::string& path);

// Reads and compiles; errors carry "file:line:col: message" lines.
Result<Plan> LoadProcedure(const std::string& path, const RigLimits& rig = {});

}  // namespace kp::cli
