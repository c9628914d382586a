// RunReport: a stored run's record plus the figures analysis computes from its
// logged samples. Shared by `report`, `demo` and the panel.
#pragma once

#include <cstdint>
#include <string>

#include <nlohmann/json_fwd.hpp>

#include "analysis/metrics.h"
#include "rig/store.h"

namespace kp {

struct RunReport {
  RunRow run;
  RunFigures figures;
  CapacityVerdict verdict;
};

Result<RunReport> BuildRunReport(Store& store, int64_t run_id);

// The machine-readable form printed by `report --json`.
nlohmann::json RunReportJson(const RunReport& report);
nlohmann::json RunRowJson(const RunRow& run);

// Human-readable block printed by `report` and `demo`.
std::string RunReportText(const RunReport& report);

}  // namespace kp
