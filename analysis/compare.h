// Comparisons across runs: pulsed versus continuous ratios and the Peukert
// rate points taken from constant-current runs. Pure functions, no I/O.
#pragma once

#include <optional>
#include <span>
#include <string>
#include <vector>

#include "analysis/peukert.h"

namespace kp {

// What a comparison needs of one run.
struct RunSummary {
  std::string label;  // "run 3"
  double charge_mah = 0.0;
  double energy_wh = 0.0;
  double mean_voltage_v = 0.0;
  double average_current_a = 0.0;  // of the main discharge
  double peak_current_a = 0.0;
  double duration_s = 0.0;  // of the main discharge (time to end voltage)
  bool pulsed = false;
  std::optional<double> resistance_ohm;  // median DC-IR, when measured
  std::string verdict;        // the full verdict line
  std::string verdict_brief;  // "PASS 101 %", "not judged: pulsed discharge"
  // One constant-current level throughout the discharge (CP, CR and mixed
  // discharges are not: they give no Peukert rate point).
  bool constant_current = true;
};

struct RatioFigures {
  std::string pulsed_label, continuous_label;
  std::string basis;            // "equal average current" or "equal peak current"
  double capacity_ratio = 0.0;  // pulsed / continuous
  double energy_ratio = 0.0;
};

// For each pulsed run, the continuous run whose average current lies within
// `tolerance` (relative) of the pulsed run's average current, and the one
// within tolerance of its peak current; one ratio per match.
std::vector<RatioFigures> PulsedVersusContinuous(std::span<const RunSummary> runs, double tolerance = 0.05);

// Rate points (current, hours) of the constant-current runs, one per run.
std::vector<RatePoint> RatePointsFromRuns(std::span<const RunSummary> runs);

}  // namespace kp
