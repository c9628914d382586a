// The demo campaign: an example qualification plan for an invented Li-ion cell
// (LN-2500) meant for a field sensor node, on the built-in simulated rig, in
// virtual time. Seven plan items, fourteen runs:
//  Q1. rated-capacity check of cell 1 (CC-CV charge, rest, 0.2 It to cutoff);
//  Q2. cell 1 again (state carried over): the product's duty cycle (sleep
//     time-compressed), its 2 A peak as a pulse train, 2 A continuously;
//  Q3. cell 1: DC-IR sweep over depth of discharge;
//  Q4. cell 2 of the same batch: a Peukert series at four constant currents;
//  Q5. the product-life projection from the measured duty-cycle capacity;
//  Q6. cell 3 with the simulator's thermal-runaway fault, aborted by the
//     over-temperature limit with the load off;
//  Q7. batch qualification: cells 4-7 of the lot at once on a simulated
//     four-channel bench (rig/bench_run.h), compared by the batch report.
// Every figure in DemoFigures is computed by the analysis code from the
// samples logged in the database (BuildRunReport / BuildCompareReport).
// Writes the database and an XHTML report folder (index.html, one page per
// run, the comparison pages). Not thread-safe; one campaign at a time.
#pragma once

#include <atomic>
#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "analysis/batch_stats.h"
#include "analysis/compare.h"
#include "analysis/dcir.h"
#include "analysis/life.h"
#include "analysis/peukert.h"
#include "drivers/status.h"
#include "rig/store.h"

namespace kp {

struct DemoOptions {
  std::string db_path = "kneepoint-demo.db";
  std::string report_dir = "kneepoint-demo-report";
  const std::atomic<bool>* stop = nullptr;  // set from a signal handler: the current run aborts
  // Called often while runs go (keep it cheap): overall fraction 0..1 by the
  // plans' estimated virtual time, and a short label of the run in progress.
  std::function<void(double fraction, const std::string& label)> on_progress;
};

// One run of the campaign, as analysed from its stored samples.
struct DemoRun {
  int64_t run_id = 0;
  std::string part;       // "Q1 rated capacity", ...
  std::string cell;       // cell name stored with the run
  std::string procedure;  // file under procedures/library/demo/
  Outcome outcome = Outcome::kRunning;
  std::string reason;
  double discharge_mah = 0.0;  // main discharge, by the report's integration method
  double discharge_wh = 0.0;
  double discharge_h = 0.0;
  double mean_voltage_v = 0.0;
  double max_temperature_c = 0.0;
  int64_t samples = 0;
  double virtual_s = 0.0;    // last sample time
  std::string report_file;   // relative to the report folder
};

struct DemoFigures {
  std::vector<DemoRun> runs;
  // 1. rated capacity
  double rated_mah = 0.0;
  double measured_mah = 0.0;
  double percent_of_rated = 0.0;
  bool capacity_pass = false;
  // The batch mate (cell 2) at the same 0.2 It in its Peukert series: the
  // spread a single cell's verdict sits in.
  int64_t batch_mate_run = 0;
  double batch_mate_percent = 0.0;
  std::string verdict_text;
  // 2. product load on the same cell
  int64_t duty_run = 0, pulsed_run = 0, continuous_run = 0;
  double duty_mah = 0.0, pulsed_mah = 0.0, continuous_mah = 0.0;
  std::vector<RatioFigures> ratios;
  // 3. DC-IR points of the two-current pairs (I1 > 0, I2 > I1)
  std::vector<DcirPoint> dcir;
  // 4. Peukert series on cell 2
  std::vector<RatePoint> rate_points;
  std::optional<PeukertFit> peukert;
  // 5. product life
  DutyProfile profile;
  std::optional<LifeProjection> life;
  double self_discharge_per_month = 0.0;
  // 6. failing cell
  int64_t failing_run = 0;
  Outcome failing_outcome = Outcome::kRunning;
  std::string failing_reason;
  bool failing_load_on_after = true;  // the simulated load's input state after the run
  double failing_load_current_after_a = 0.0;
  double failing_max_temperature_c = 0.0;
  // 7. batch qualification on a four-channel bench
  std::string batch_name;
  std::vector<int64_t> batch_runs;  // by slot
  BatchStats batch_capacity;        // over the completed runs (analysis/batch_stats.h)
  int batch_passes = 0, batch_outliers = 0;
  std::string batch_page;  // relative to the report folder
  // Output
  std::string index_html;                // path of the report folder's index.html
  std::vector<std::string> pages;        // every page written, relative to the report folder
  double virtual_hours = 0.0;            // all runs together
};

// A previous demo database at `path` is removed (with its -wal/-shm files)
// only if it opens as a kneepoint database; any other file is an error.
Status PrepareDemoDb(const std::string& path);

Result<DemoFigures> RunDemoCampaign(const DemoOptions& options);

// The short summary table printed at the end of `kneepoint demo`.
std::string DemoSummaryText(const DemoFigures& figures);

}  // namespace kp
