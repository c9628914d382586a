// Procedure files: the plain-text language a technician writes (see README,
// "Procedure language"), compiled into a Plan.
//
// One statement per line; '#' starts a comment. Every number carries a unit.
// Errors are collected per line so one pass reports as many as it can; each
// names line and column (1-based, columns in bytes).
// Pure functions: no I/O, thread-safe.
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include "drivers/status.h"
#include "procedures/plan.h"

namespace kp {

struct Diagnostic {
  int line = 0;
  int col = 0;
  std::string message;
};

struct ParseOutput {
  Plan plan;                         // meaningful only when errors is empty
  std::vector<Diagnostic> errors;    // in line order
  std::vector<Diagnostic> warnings;  // legal but probably not meant (also in Plan::warnings)
  bool ok() const { return errors.empty(); }
};

// Parses and validates `text`. `name` becomes Plan::name; `rig` caps the plan
// (its problems are reported as errors at the offending step's line).
ParseOutput ParseProcedure(std::string_view text, const std::string& name, const RigLimits& rig = {});

// "file:line:col: message" lines, one per diagnostic.
std::string FormatDiagnostics(const std::string& file, const std::vector<Diagnostic>& errors);

// A named duty pattern: the phases of a `duty NAME` ... `end` block, at their
// real (uncompressed) durations.
struct DutyPattern {
  std::string name;
  std::vector<Segment> phases;
  int line = 0;
};
// The duty blocks of a text: a whole procedure, or a file holding only duty
// blocks (no cell line needed unless a phase is a C-rate). The one way a duty
// profile is written; `kneepoint life --duty FILE[:NAME]` reads it here.
// kInvalidInput carries FormatDiagnostics() of the errors.
Result<std::vector<DutyPattern>> ReadDutyPatterns(std::string_view text, const std::string& file);

// ParseProcedure as a Result: kInvalidInput carrying FormatDiagnostics().
Result<Plan> CompileProcedure(std::string_view text, const std::string& file, const RigLimits& rig = {});

}  // namespace kp
