// The options of `run` that make a run a traceable record: who ran it, on
// which bench, which cell (serial, lot, part number), tags and a note. They
// fill NewRun's record fields (rig/store.h); the equipment comes from the rig.
#pragma once

#include <CLI/CLI.hpp>

#include <string>
#include <vector>

#include "rig/store.h"

namespace kp::cli {

struct RecordOptions {
  std::string bench;     // empty: the rig file's [bench] name ("sim" for the simulator)
  std::string operator_name;  // empty: $KNEEPOINT_OPERATOR, else the login name ($USER)
  std::string serial, lot, part;
  std::vector<std::string> tags;  // each may be a comma list
  std::string note;
};

void AddRecordOptions(CLI::App* c, RecordOptions& o);
// Checks the values (tags: no empty ones, no control characters) and copies
// them into `record`.
Status FillRecord(const RecordOptions& o, NewRun& record);

}  // namespace kp::cli
