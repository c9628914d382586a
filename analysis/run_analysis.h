// Every figure of one run in one call, analysed by what the procedure
// commanded: the step instances the engine recorded (kind, commanded level,
// loop pass, cycle, start and end), never by structure re-inferred from the
// samples. Pure, no I/O: the caller (rig/run_report) gathers the samples, the
// step records and the engine's DC-IR points from the store.
//
// Definitions (also in README, "How the figures are defined"):
// - A step instance owns the samples whose time lies in (start, end]: the
//   reading that ends a step was taken before the next setpoint went out, so
//   it belongs to the step that ends there; the open-circuit reading at t = 0
//   belongs to no step. Each interval between two samples belongs to the
//   instance that owns its closing sample (trapezoid), so instance sums add up
//   to the whole record.
// - A discharge runs from the first discharge-kind instance (CC, CP, CR,
//   pulse train, duty cycle, DC-IR test) after a charge, or the run start, to
//   the instance that reached a voltage cutoff or else the last discharge-kind
//   instance before the next charge. Rests inside it belong to it; a trailing
//   rest never does.
// - A cycle starts at each charge instance that follows a non-charge one
//   (cycle 0 is what ran before the first charge).
#pragma once

#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "analysis/dcir.h"
#include "analysis/integrate.h"
#include "analysis/metrics.h"
#include "analysis/pulse.h"
#include "analysis/sample.h"
#include "analysis/verdict.h"

namespace kp {

enum class StepClass { kRest, kConstantCurrent, kConstantPower, kConstantResistance, kPulseTrain, kDutyCycle, kDcir, kCharge, kUnknown };
// From the kind names the engine stores ("rest", "constant-current discharge", ...).
StepClass StepClassFromKind(std::string_view kind);
bool IsDischargeClass(StepClass c);

// A step instance as the run recorded it.
struct StepRecord {
  int index = 0;     // 0-based plan index; users see index + 1
  std::string kind;  // stored kind name
  double started_s = 0.0;
  std::optional<double> ended_s;  // empty while running or when the run died in it
  std::string end_reason;
  std::string mode;             // "current", "power", "resistance", "charge", "segments", "off"
  std::optional<double> level;  // commanded A, W or Ohm (charge: A)
  int pass = 0;
  int cycle = 0;
  double held_s = 0.0;
  // The commanded constant-current segments of a pulse train or duty cycle in
  // run time; empty when unknown or when the step was held (phase lost).
  std::vector<CommandedSegment> segments;
  // The spacing the procedure asked for between stored samples (its sample
  // period, or the longest gap of a log-on-change step); empty when unknown.
  // A gap longer than kAbsoluteGapFactor times it is a gap whatever the
  // median spacing (a link that dropped most readings has a long median).
  std::optional<double> expected_spacing_s;
};

inline constexpr double kAbsoluteGapFactor = 10.0;


struct RunContext {
  double rated_mah = 0.0;
  std::string chemistry;
  std::optional<double> cutoff_v;  // end voltage, for time to cutoff
  std::vector<StepRecord> steps;   // may be empty (then the record is one block)
  std::vector<Gap> recorded_gaps;  // gaps the runner logged as events
  // Times of `gap` events: each becomes the interval between the samples
  // around it (the last before it and the first at or after it).
  std::vector<double> gap_event_times;
  // Charge counted for outages (a dead runner's unlogged time, accounted on
  // resume): (run time of the outage's end, mAh). Added to the charge of the
  // step instance running then, so discharges and verdicts include it; the
  // report says how it was counted (analysis/METHODS.md, "Outages").
  std::vector<std::pair<double, double>> outage_mah;
  DcirOptions dcir;
  std::optional<double> brownout_v;
  // DC-IR points the engine measured at commanded edges. When
  // `dcir_recorded` is false (runs logged before the engine measured them),
  // points are taken from the samples at the commanded edges inside dcir,
  // pulse and duty steps only.
  bool dcir_recorded = false;
  std::vector<DcirPoint> engine_dcir;
  std::vector<std::string> dcir_invalid;  // the reasons of the points left out, one per point
  double temperature_tolerance_c = 0.5;   // of the thermometer, for the start-temperature condition
  // IEC 61960-3 allows up to five charge/discharge cycles to reach the rated
  // capacity, stopping at the first that passes (from memory).
  int max_attempts = 5;
};

// Figures of one step instance.
struct InstanceFigures {
  StepFigures f;  // step (plan index), times, charge, energy, means, min V, samples
  int number = 0;  // index + 1
  std::string kind;
  StepClass cls = StepClass::kUnknown;
  int pass = 0, cycle = 0;
  double started_s = 0.0, ended_s = 0.0;  // commanded start and recorded end
  std::string end_reason;
  double held_s = 0.0;
  std::optional<double> level;
  std::string mode;
  IntegrationMethod method = IntegrationMethod::kSampleTrapezoid;
};

struct DischargeFigures {
  size_t first = 0, last = 0;  // instance indices, inclusive
  int cycle = 0;
  double start_s = 0.0, end_s = 0.0;
  double charge_mah = 0.0, energy_wh = 0.0;
  double mean_voltage_v = 0.0, mid_voltage_v = 0.0, min_voltage_v = 0.0;
  double average_current_a = 0.0, peak_current_a = 0.0;
  std::optional<double> time_to_cutoff_s;
  bool reached_cutoff = false;
  bool pulsed = false;         // contains a pulse train or duty cycle
  size_t judged = 0;           // the instance judged by the capacity method (reached the cutoff, else the largest)
  std::string description;     // "constant current 0.500 A (0.20 It)", "constant resistance 6.0 Ohm", "pulsed"
  double start_temperature_c = 0.0;
  IntegrationMethod method = IntegrationMethod::kSampleTrapezoid;  // per-segment if any instance used it
  CapacityJudgement judgement;
};

struct CycleFigures {
  int cycle = 0;
  double charge_in_mah = 0.0, charge_in_wh = 0.0;
  std::optional<size_t> discharge;  // index into RunAnalysis::discharges
  double discharge_mah = 0.0, discharge_wh = 0.0;
  std::optional<double> coulombic_efficiency, energy_efficiency;  // discharge / charge; empty when under 1 % went in
  std::optional<double> retention;                                 // discharge / first cycle's discharge
};

struct RunAnalysis {
  RunFigures totals;  // whole record, sample trapezoid
  std::vector<StepFigures> steps;          // per step instance (same order as `instances`)
  std::vector<InstanceFigures> instances;  // per step instance, with its record
  std::vector<DischargeFigures> discharges;
  std::vector<CycleFigures> cycles;  // empty for a run without a charge step
  std::optional<size_t> main_discharge;  // the one the headline figures describe
  std::vector<Gap> gaps;                 // found in the samples plus those recorded
  IntegrationMethod method = IntegrationMethod::kSampleTrapezoid;  // of the main discharge
  // The main discharge (the attempt the verdict judged; else the largest).
  double discharge_charge_mah = 0.0;
  double discharge_energy_wh = 0.0;
  int main_discharge_step = -1;  // plan index of its first instance
  int last_discharge_step = -1;  // plan index of its last instance
  double discharge_start_s = 0.0;
  double discharge_duration_s = 0.0;
  double mean_voltage_v = 0.0;             // time-weighted over the discharge
  double mid_voltage_v = 0.0;              // at half the discharge's duration
  std::optional<double> time_to_cutoff_s;  // from the discharge's start to the first sample <= cutoff
  double average_current_a = 0.0;          // charge / duration of the discharge
  double peak_current_a = 0.0;
  bool pulsed = false;
  bool constant_current = false;  // the discharge is one constant-current level (Peukert-eligible)
  std::string discharge_description;
  std::vector<DcirPoint> dcir;
  std::vector<std::pair<std::string, int>> dcir_left_out;  // reason, count
  std::vector<PulseFigures> pulses;
  std::optional<Brownout> brownout;
  double start_temperature_c = 0.0, max_temperature_c = 0.0, temperature_rise_c = 0.0;
  CapacityJudgement verdict;
  std::vector<size_t> attempts;  // discharges judged as capacity attempts (indices into `discharges`)
};

// Withholds the method verdict of the run and of each attempt: the figures
// stay, the text becomes "not judged: WHY; ..." (a run that did not finish,
// readings missing). Pure.
void WithholdVerdicts(RunAnalysis& analysis, const std::string& why);

// Decimated series for plots, built while the samples stream by: each of
// `columns` columns keeps its lowest and its highest point, in time order, so
// every spike survives and the series stay bounded whatever the run's length.
struct PlotPoints {
  std::vector<double> x, y;
};
struct RunPlots {
  PlotPoints voltage, current, temperature;  // against run time (s)
  // Per discharge (RunAnalysis::discharges order): voltage against the charge
  // delivered since its start (mAh), and against time from its start (s).
  std::vector<PlotPoints> discharge_vq, discharge_vt;
};

// The analysis in one pass over a run's samples in time order, with memory
// bounded by the number of step instances, discharges, pulses and DC-IR
// points, not by the number of samples (runs recorded before the engine
// measured DC-IR keep their samples for it). `t_first_s`/`t_last_s` are the
// record's first and last sample times (they place the plot columns).
class RunStream {
 public:
  RunStream(const RunContext& context, double t_first_s, double t_last_s, size_t plot_columns = 1500);
  ~RunStream();
  RunStream(const RunStream&) = delete;
  RunStream& operator=(const RunStream&) = delete;
  // Samples in time order.
  void Add(const Sample& sample);
  RunAnalysis Finish();
  // The plots, after Finish.
  RunPlots TakePlots();

 private:
  struct State;
  std::unique_ptr<State> st_;
};

// The same over samples in memory (RunStream fed with all of them).
RunAnalysis AnalyseRun(SampleSpan samples, const RunContext& context);

// The discharges of a run by the definition above, from its step records
// alone (instances without a recorded end end where the next begins, the last
// at `record_end_s`). Used by AnalyseRun and by the panel.
struct DischargeSpan {
  size_t first = 0, last = 0;  // indices into the records, inclusive
  double start_s = 0.0, end_s = 0.0;
  int cycle = 0;
  bool reached_cutoff = false;
};
std::vector<DischargeSpan> DischargeSpans(const std::vector<StepRecord>& records, double record_end_s);

// From a run's instances and discharges (already figured): the capacity
// attempts, the main discharge with the headline figures and the verdict, and
// the per-cycle table. Shared by the stream and the batch reference in the tests.
void SettleAttemptsAndCycles(RunAnalysis& analysis, const RunContext& context);

// What a discharge over instances [first, last] commanded, in words
// ("constant current 0.5 A (0.20 It)", "constant resistance 6 Ohm"); sets
// `constant_current` when it is one constant-current level, and `not_cc` to
// the reason a capacity method cannot judge it when it is not.
std::string DescribeDischarge(const std::vector<InstanceFigures>& instances, size_t first, size_t last, double rated_mah,
                              bool& constant_current, std::string& not_cc);

// True when a step's end reason says a voltage fell to its limit ("voltage
// 2.748 V <= 2.750 V", or a repeat loop that ended on one).
bool ReachedVoltageCutoff(std::string_view end_reason);

}  // namespace kp
