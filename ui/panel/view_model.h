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
#include "rig/sample_summary.h"
#include "rig/store.h"

namespace kp::ui {

// Delivered charge and energy integrated as samples arrive (trapezoidal over
// the actual sample times, the same rule as analysis/metrics.h), so a live run
// never needs a full recomputation. Held as a SampleSummary, so the figures
// of a run can also be put together from its stored block summaries.
class RunningFigures {
 public:
  RunningFigures() = default;
  explicit RunningFigures(const SampleSummary& s) : s_(s) {}
  void Add(const Sample& s) { s_.Add(s); }
  void Reset() { *this = RunningFigures{}; }
  double charge_mah() const { return s_.net_mah; }  // net: charging counts negative
  // Charge delivered by the cell only (intervals where it was discharging):
  // what the runs list shows, so a charge-then-discharge run reads right.
  double discharged_mah() const { return s_.discharged_mah; }
  double energy_wh() const { return s_.net_wh; }  // net, like charge_mah()
  double discharged_wh() const { return s_.discharged_wh; }  // energy the cell gave
  double charged_mah() const { return s_.charged_mah; }      // charge put into the cell
  // Delivered since the cell was last charged (the whole run when it never
  // was): what the remaining-time estimate counts against the rating.
  double discharged_since_charge_mah() const { return s_.since_charge_mah; }
  double min_voltage_v() const { return s_.min_voltage_v; }
  // Time-weighted mean voltage (the last voltage while no time has passed).
  double mean_voltage_v() const;
  double max_temperature_c() const { return s_.max_temperature_c; }
  size_t count() const { return static_cast<size_t>(s_.count); }
  // Last sample added (valid when count() > 0).
  const Sample& last() const { return s_.last; }
  double first_t_s() const { return s_.first.t_s; }
  const SampleSummary& summary() const { return s_; }

 private:
  SampleSummary s_;
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

// Where a run stands (see StatusOf below).
enum class RunState { kRunning, kPaused, kHeld, kCompleted, kAborted, kInterrupted };

// One line of the runs list.
struct RunListRow {
  int64_t id = 0;
  Outcome outcome = Outcome::kRunning;
  std::string state;  // "running", "paused", "held", "completed", ... (RunStateWord)
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
  RunState run_state = RunState::kRunning;
  // The traceable record the filter also searches: UUID, cell serial, lot and
  // part, operator, bench, tags (space-separated).
  std::string record;
  // Multi-channel benches: the run's `slot=` and `batch=` tags (empty when
  // none) and the bench it ran on (its recorded bench name, else the rig).
  std::string slot, batch, bench;
};
RunListRow MakeRunListRow(const RunRow& run, const RunningFigures& figures);
// The run list's verdict of a completed run, without the full analysis: the
// stored procedure says whether its discharge is the capacity method's
// constant-current test (then "PASS 101 %" / "FAIL 97 %"), or not ("not
// judged: pulsed discharge"); the same rule as the report's verdict.
std::string ListVerdict(const RunRow& run, double delivered_mah);

// True when every whitespace-separated word of `filter` occurs (ignoring case)
// in the row's id, state, cell, chemistry, procedure, verdict, start time or
// record (UUID, serial, lot, part, operator, bench, tags).
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

// Where a run stands, for its badge and the actions offered. A running run
// is paused (an operator's pause: "control" event "paused by ...") or held
// (the runner's own hold with the load off: "pause" for heat, "fault" for an
// instrument that stopped answering) until the matching release ("control"
// "continued by ...", or "resume"); the newest of these events decides.
struct RunStatus {
  RunState state = RunState::kRunning;
  std::string badge;   // "RUNNING", "PAUSED", "HELD", "COMPLETED", "ABORTED", "INTERRUPTED"
  std::string reason;  // why paused / held / ended (the event message or the run's reason); may be empty
  double since_s = 0.0;  // run time of the pause or hold
  bool load_off = false;  // the load input is off: readings are the last ones, not live
  bool can_pause = false, can_continue = false, can_abort = false;
};
RunStatus StatusOf(const RunRow& run, const std::vector<EventRow>& events);
// Puts a running run's pause or hold into its list row (state word and reason).
void SetListState(RunListRow& row, const RunStatus& status);
const char* RunStateWord(RunState s);  // "running", "paused", "held", "completed", ...

// Run times of the "gap" events (readings really missing), ascending: where a
// trace may stop. Sparse logging (log-change) leaves no such event.
std::vector<double> GapTimes(const std::vector<EventRow>& events);

// Labels for compared runs that say what differs: the names without the
// family prefix they all share (leading words up to one ending in ':', as
// in "bench check: capacity at 1 It" / "bench check: peak load 2 A" ->
// "capacity at 1 It" / "peak load 2 A"). A single name, or one that would be
// left empty, stays whole.
std::vector<std::string> DistinctLabels(const std::vector<std::string>& names);

// `text` cut to fit `width` (as measured by `measure`) with "…" at the end;
// unchanged when it fits. Cuts between UTF-8 characters.
std::string Ellipsize(const std::string& text, float width, float (*measure)(const std::string&, void*), void* ctx);

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
