// Every figure of one run in one call: totals, per-step figures, gaps, the
// capacity verdict, DC-IR points, pulse metrics and temperature. Pure, no I/O:
// the caller (rig/run_report) gathers the samples and the run's context from
// the store.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "analysis/dcir.h"
#include "analysis/integrate.h"
#include "analysis/metrics.h"
#include "analysis/pulse.h"
#include "analysis/sample.h"
#include "analysis/verdict.h"

namespace kp {

// A step as the run recorded it (from the store's steps table).
struct StepBoundary {
  int index = 0;
  std::string kind;  // "rest", "constant-current discharge", ...
  double started_s = 0.0;
  std::optional<double> ended_s;
};

struct RunContext {
  double rated_mah = 0.0;
  std::string chemistry;
  std::optional<double> cutoff_v;          // end voltage, for time to cutoff
  std::vector<StepBoundary> steps;         // may be empty
  std::vector<CommandedSegment> segments;  // commanded pulse/duty segments; empty when unknown
  std::vector<Gap> recorded_gaps;          // gaps the runner logged as events
  DcirOptions dcir;
  std::optional<double> brownout_v;
  double segment_tolerance_a = 0.005;  // for segments reconstructed from samples
};

struct RunAnalysis {
  RunFigures totals;  // whole record, sample trapezoid
  std::vector<StepFigures> steps;
  std::vector<Gap> gaps;  // found in the samples plus those recorded
  IntegrationMethod method = IntegrationMethod::kSampleTrapezoid;
  // The discharge: the run of consecutive non-charging steps, starting and
  // ending with a discharging step, that delivered the most charge (a plain
  // discharge step, or a pulse train / duty cycle written as several steps).
  double discharge_charge_mah = 0.0;  // by `method`
  double discharge_energy_wh = 0.0;
  int main_discharge_step = -1;  // first step of the discharge
  int last_discharge_step = -1;
  double discharge_start_s = 0.0;
  double discharge_duration_s = 0.0;
  double mean_voltage_v = 0.0;             // time-weighted over the discharge
  double mid_voltage_v = 0.0;              // at half the discharge's duration
  std::optional<double> time_to_cutoff_s;  // from the discharge's start to the first sample <= cutoff
  double average_current_a = 0.0;          // charge / duration of the discharge
  double peak_current_a = 0.0;
  bool pulsed = false;
  std::vector<DcirPoint> dcir;
  std::vector<PulseFigures> pulses;
  std::optional<Brownout> brownout;
  double start_temperature_c = 0.0, max_temperature_c = 0.0, temperature_rise_c = 0.0;
  CapacityJudgement verdict;
};

RunAnalysis AnalyseRun(SampleSpan samples, const RunContext& context);

}  // namespace kp
