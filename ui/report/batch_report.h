// Batch report: the runs of one batch (the runs tagged batch=NAME, one per
// cell, started together on the channels of a bench by `run --slots ...
// --batch NAME`) compared: each cell's capacity (the delivered charge of its
// judged discharge, from the step records), its DC resistance (median of the
// run's DC-IR points, when the procedure measured any), its verdict; and over
// the batch the mean, sample standard deviation, min, max and the outliers by
// the modified z-score (analysis/batch_stats.h). Only completed runs enter the
// statistics; the others are listed with their outcome.
//
// `report --batch NAME --db DB [--json] [--html FILE]`.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "analysis/batch_stats.h"
#include "rig/store.h"

namespace kp {

// Version of `report --batch --json`. 1: batch, generated_at, cells (slot,
// serial, run_record, capacity_mAh, resistance_mOhm, verdict, in_statistics,
// capacity_outlier, resistance_outlier), capacity_mAh and resistance_mOhm
// statistics (n, mean, stddev, min, max, median, mad), outlier_rule.
inline constexpr int kBatchReportSchemaVersion = 1;

struct BatchCell {
  RunRow run;
  std::string slot;
  std::optional<double> capacity_mah;
  std::optional<double> resistance_mohm;
  std::string verdict;  // VerdictWord of its report
  bool in_statistics = false;  // completed, with a discharge
  bool capacity_outlier = false, resistance_outlier = false;
  std::optional<double> capacity_z, resistance_z;  // modified z-scores
};

struct BatchReport {
  std::string batch;
  std::vector<BatchCell> cells;  // by slot, then run id
  BatchStats capacity, resistance;
};

// The cells of a batch and their figures, from the stored runs.
BatchReport MakeBatchReport(std::string batch, std::vector<BatchCell> cells);
Result<BatchReport> BuildBatchReport(Store& store, const std::string& batch);

std::string BatchReportText(const BatchReport& report);
nlohmann::json BatchReportJson(const BatchReport& report);
std::string BatchReportHtml(const BatchReport& report);

// The rule, in words (text, JSON and page).
std::string OutlierRuleText();

}  // namespace kp
