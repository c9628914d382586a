// What the panel shows, computed from store rows without any window: the runs
// list with its filter, running figures kept up to date sample by sample, the
// remaining-time estimate, the limits to draw, and how loud each event is.
// Plain C++, unit-tested in tests/ui.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "analysis/sample.h"
#include "rig/store.h"

namespace kp::ui {

// Delivered charge and energy integrated as samples arrive (trapezoidal over
// the actual sample times, the same rule as analysis/metrics.h), so a live run
// never needs a full recomputation.
class RunningFigures {
 public:
  void Add(const Sample& s);
  void Reset() { *this = RunningFigures{}; }
  double charge_mah() const { return charge_mah_; }  // net: charging counts negative
  // Charge delivered by the cell only (intervals where it was discharging):
  // what the runs list shows, so a charge-then-discharge run reads right.
  double discharged_mah() const { return discharged_mah_; }
  double energy_wh() const { return energy_wh_; }  // net, like charge_mah()
  double discharged_wh() const { return discharged_wh_; }  // energy the cell gave
  double charged_mah() const { return charged_mah_; }      // charge put into the cell
  // Delivered since the cell was last charged (the whole run when it never
  // was): what the remaining-time estimate counts against the rating.
  double discharged_since_charge_mah() const { return since_charge_mah_; }
  double min_voltage_v() const { return min_voltage_v_; }
  // Time-weighted mean voltage (the last voltage while no time has passed).
  double mean_voltage_v() const;
  double max_temperature_c() const { return max_temperature_c_; }
  size_t count() const { return count_; }
  // Last sample added (valid when count() > 0).
  const Sample& last() const { return last_; }
  double first_t_s() const { return first_t_s_; }

 private:
  double charge_mah_ = 0.0;
  double discharged_mah_ = 0.0;
  double energy_wh_ = 0.0;
  double discharged_wh_ = 0.0;
  double charged_mah_ = 0.0;
  double since_charge_mah_ = 0.0;
  double voltage_time_vs_ = 0.0;  // ∫ V dt
  double min_voltage_v_ = 0.0;
  double max_temperature_c_ = 0.0;
  double first_t_s_ = 0.0;
  size_t count_ = 0;
  Sample last_;
};

// Limits the plots draw, read from the procedure text stored with the run.
// Each is absent when the text does not state it; nothing is invented.
struct DrawnLimits {
  std::optional<double> cutoff_v;
  std::optional<double> min_voltage_v;
  std::optional<double> max_voltage_v;
  std::optional<double> max_temp_c;
};
// Scans `procedure_text` for "<keyword> [=|:] <number>" with keywords such as
// cutoff / end-voltage, max-temp, min-voltage, max-voltage (case-insensitive,
// '-' and '_' alike), and falls back to a step label's "to <number> V" for the
// cutoff.
DrawnLimits ScanLimits(const std::string& procedure_text, const std::vector<StepRow>& steps);

// The limits of the procedure stored with a run: compiled with the procedure
// parser (cell cutoff, safety min/max voltage, max temperature); text the
// parser refuses (an older or hand-written record) falls back to ScanLimits.
DrawnLimits LimitsForRun(const std::string& procedure_text, const std::string& procedure_name, const std::vector<StepRow>& steps);

// One line of the runs list.
struct RunListRow {
  int64_t id = 0;
  Outcome outcome = Outcome::kRunning;
  std::string state;  // "running", "completed", ...
  std::string cell;
  std::string chemistry;
  std::string procedure;
  std::string started_at;
  double elapsed_s = 0.0;
  double delivered_mah = 0.0;
  double rated_mah = 0.0;
  std::string verdict;  // "PASS 102 %", "FAIL 87 %" (completed runs), "incomplete" (aborted,
                        // interrupted), "-" while running or without a rating
  std::string reason;
};
RunListRow MakeRunListRow(const RunRow& run, const RunningFigures& figures);
// The run list's verdict of a completed run, without the full analysis: the
// stored procedure says whether its discharge is the capacity method's
// constant-current test (then "PASS 101 %" / "FAIL 97 %"), or not ("not
// judged: pulsed discharge"); the same rule as the report's verdict.
std::string ListVerdict(const RunRow& run, double delivered_mah);

// True when every whitespace-separated word of `filter` occurs (ignoring case)
// in the row's id, state, cell, chemistry, procedure, verdict or start time.
bool MatchesFilter(const RunListRow& row, const std::string& filter);

// Estimated seconds left in a running discharge, or nullopt when nothing
// supports an estimate. The smaller of: charge left to the rated capacity at
// the present current, and the time for the recent voltage slope (last
// `window_s` of samples) to reach the cutoff. (Common practice, no source:
// a rough display aid, never used for control.)
std::optional<double> EstimateRemainingS(const std::vector<Sample>& samples, double delivered_mah, double rated_mah,
                                         std::optional<double> cutoff_v, double window_s = 600.0);

enum class Severity { kInfo, kNotice, kAlarm };
// Aborts, faults, limit trips and instrument losses are alarms; retries and
// pauses are notices; the rest is information.
Severity EventSeverity(const EventRow& e);

// True when the newest pause/continue event of a running run is a pause
// (event kinds containing "pause" versus "continue" or "resume").
bool IsPaused(const std::vector<EventRow>& events);

// The step in force at the latest sample and its end condition text (the
// step's label as written in the plan), or empty when no step is recorded.
struct StepNow {
  int index = -1;
  std::string kind;
  std::string label;
  double started_s = 0.0;
  bool ended = false;
  std::string end_reason;
};
StepNow CurrentStep(const std::vector<StepRow>& steps);

}  // namespace kp::ui
