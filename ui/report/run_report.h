// RunReport: a stored run's record plus every figure analysis computes from
// its logged samples, steps and events; and the comparison of several runs.
// Shared by `report`, `compare`, `demo` and the panel. Building reads the
// Store; rendering (JSON, text, CSV, XHTML) is pure string building.
#pragma once

#include <cstdint>
#include <nlohmann/json_fwd.hpp>
#include <optional>
#include <string>
#include <vector>

#include "analysis/compare.h"
#include "analysis/metrics.h"
#include "analysis/peukert.h"
#include "analysis/run_analysis.h"
#include "rig/store.h"

namespace kp {

struct ReportOptions {
  DcirOptions dcir;                  // delay after each current edge
  std::optional<double> brownout_v;  // report the first pulse below this voltage
};

struct RunReport {
  RunRow run;
  RunFigures figures;       // whole record (sample trapezoid)
  CapacityVerdict verdict;  // plain >= 100 % of rated on the delivered charge
  RunAnalysis analysis;     // per step, per discharge, method verdict, DC-IR, pulses
  std::vector<StepRow> steps;
  RunPlots plots;     // decimated while the samples streamed by (bounded, whatever the run's length)
  RunContext context;  // what the analysis was given (step records, DC-IR points, options)
  ReportOptions options;
  Store::RunTotalsRow totals;            // what the runner kept on the runs row
  std::vector<std::string> dcir_sources;  // per analysis.dcir point: "dcir step", "pulse edge", ...
  // Limits of the stored procedure, drawn on the plots, and where an aborted
  // run stopped (its "abort" event).
  std::optional<double> max_temp_c;
  std::optional<double> abort_t_s;
  std::string abort_reason;
  EquipmentRow equipment;       // instruments, rig file text, software (schema v5)
  std::vector<EventRow> notes;  // the run's notes, oldest first
};

// Version of the `report --json` / `compare --json` layout. 2: schema_version,
// per-instance step records (number, pass, cycle, method), discharges, cycles,
// attempts, DC-IR sources and left-out points. Keys of version 1 keep their
// names and meanings. 3: run_record (the run in the one shape every JSON
// output uses, RunRowJson), equipment, notes; compare --json carries
// schema_version and each run's run_record; methods (how each figure was
// obtained, with its source and this run's deviations).
inline constexpr int kReportSchemaVersion = 3;
// Version of the run object (RunRowJson) used by `runs --json`, `export
// --json` ("run") and `report --json` ("run_record"). 2: uuid, bench, host,
// operator, cell_serial, cell_lot, cell_part, tags, verdict; keys of version
// 1 (id, cell, chemistry, procedure, rig, outcome, reason, started_at,
// ended_at, rated_mAh, samples) keep their names and meanings.
inline constexpr int kRunRecordSchemaVersion = 2;

// How each headline figure was obtained: the method, any deviation from it in
// this run, and the source (standard, clause, edition). Shown in the report's
// "Method" section and its JSON ("methods"), not in the terminal summary.
struct MethodNote {
  std::string figure;
  std::string method;
  std::string source;
};
std::vector<MethodNote> MethodNotes(const RunReport& report);

Result<RunReport> BuildRunReport(Store& store, int64_t run_id, const ReportOptions& options = {});

// The machine-readable form printed by `report --json`. Every figure shown in
// the HTML page is also here, at the JSON pointer named by its cell.
nlohmann::json RunReportJson(const RunReport& report);
nlohmann::json RunRowJson(const RunRow& run);
nlohmann::json EquipmentJson(const EquipmentRow& equipment);

// "pass", "fail" or "not judged", as `runs --verdict` filters: the report's
// capacity verdict (judged and the capacity criterion met).
std::string VerdictWord(const RunReport& report);
// Stores the report's verdict on its run (Store::SetVerdict); nothing for a
// run still running.
Status RecordVerdict(Store& store, const RunReport& report);

// Human-readable block printed by `report` and `demo`.
std::string RunReportText(const RunReport& report);
// Its traceable-record lines: run UUID, cell serial/lot/part, operator, bench,
// host, tags, software, instruments with their calibration, notes.
std::string RunRecordText(const RunReport& report);
// The run's record as labelled text fields (cell, serial, lot, operator,
// bench, rig, times, outcome, software...), in the order every filed form
// shows them: the HTML report's "Equipment and conditions" table and the
// xlsx summary sheet both list exactly these (the run number comes first,
// written by each in its own way). Empty values stay empty.
struct RecordField {
  std::string label, value;
};
std::vector<RecordField> RunRecordFields(const RunReport& report);
// Per-step figures as CSV (one header row, one row per step).
std::string RunReportStepsCsv(const RunReport& report);
// Per-cycle figures as CSV (one header row, one row per cycle; empty cells
// where a figure does not exist, e.g. no charge in cycle 0).
std::string RunReportCyclesCsv(const RunReport& report);
// Self-contained XHTML page with inline SVG plots.
std::string RunReportHtml(const RunReport& report);

// --- across runs ---
struct CompareReport {
  std::vector<RunReport> runs;
  std::vector<RunSummary> summaries;
  std::vector<RatioFigures> ratios;
  PeukertOutcome peukert;              // over the continuous runs
  std::optional<double> predict_at_a;  // user-given current for a prediction
};

Result<CompareReport> BuildCompareReport(Store& store, const std::vector<int64_t>& run_ids, std::optional<double> predict_at_a,
                                         const ReportOptions& options = {});
RunSummary SummariseRun(const RunReport& report);
nlohmann::json CompareReportJson(const CompareReport& report);
std::string CompareReportText(const CompareReport& report);
// The side-by-side table as CSV (one row per run).
std::string CompareReportCsv(const CompareReport& report);
std::string CompareReportHtml(const CompareReport& report);

}  // namespace kp
