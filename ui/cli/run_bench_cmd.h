// `run` on a multi-channel bench: the options that choose channels, and the
// command that runs several at once (ui/cli/cmd_run_bench.cpp).
//
//   --slot A2                       one channel, as a one-cell run (resume finds it again)
//   --slots A1,A2,A3,A4             several channels at once, one procedure
//   --slots A1,A2,B1=other.kpp      a channel with its own procedure
//   --serials S1,S2,S3,S4           the cells' serials, in the order of --slots
//   --batch LOT-7                   a batch: recorded as a tag batch=LOT-7 on each run,
//                                   and `report --batch LOT-7` compares them
#pragma once

#include <CLI/CLI.hpp>

#include <string>
#include <vector>

#include "ui/cli/record_options.h"

namespace kp::cli {

struct BenchRunArgs {
  std::string slot;
  std::vector<std::string> slots;
  std::vector<std::string> serials;
  std::string batch;
};

void AddBenchRunOptions(CLI::App* c, BenchRunArgs& a);

// The run tags that place a run on a bench: "slot=A1", "batch=LOT-7".
std::string SlotTag(const std::string& slot);
std::string BatchTag(const std::string& batch);
// The slot / batch a run's tags name (empty: none).
std::string SlotOfRun(const std::vector<std::string>& tags);
std::string BatchOfRun(const std::vector<std::string>& tags);

int RunBenchCommand(const std::string& file, const std::string& rig, const std::string& db, const std::string& trace, double link_grace_s,
                    double hang_limit_s, double progress_s, const RecordOptions& record, const BenchRunArgs& args);

}  // namespace kp::cli
