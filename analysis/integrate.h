// Charge and energy per step and per commanded segment; gap detection.
// Pure functions over sample spans, no I/O.
//
// Sample integration is trapezoidal over the actual sample times. Each
// interval [s[i-1], s[i]] belongs to the step of its closing sample s[i] (the
// reading taken after the interval, at that step's setpoint), so the per-step
// sums add up to the whole-run integral.
#pragma once

#include <cstddef>
#include <span>
#include <string>
#include <vector>

#include "analysis/sample.h"

namespace kp {

// Figures of one step (consecutive samples with the same step index).
struct StepFigures {
  int step = 0;
  double t_start_s = 0.0;  // first sample of the step
  double t_end_s = 0.0;    // last sample of the step
  double charge_mah = 0.0;
  double energy_wh = 0.0;
  double mean_current_a = 0.0;  // charge / time over the step's intervals
  double mean_voltage_v = 0.0;  // time-weighted
  double min_voltage_v = 0.0;
  size_t samples = 0;
  bool discharging() const { return charge_mah > 0.0; }
};

std::vector<StepFigures> FiguresPerStep(SampleSpan samples);

// A hole in the record: sample spacing far larger than the usual spacing of
// its step (an interrupted run resumed later, a lost link). The interval is
// still integrated (the trapezoid bridges it) but the report flags it.
struct Gap {
  double t_start_s = 0.0;
  double t_end_s = 0.0;
  int step = 0;
  double duration_s() const { return t_end_s - t_start_s; }
};

struct GapOptions {
  double factor = 10.0;    // spacing > factor × the step's median spacing
  double min_gap_s = 5.0;  // and longer than this
};
std::vector<Gap> FindGaps(SampleSpan samples, const GapOptions& options = {});

// A commanded interval of constant current (from the procedure's pulse train
// or duty-cycle profile). current_a > 0 discharges.
struct CommandedSegment {
  double t_start_s = 0.0;
  double t_end_s = 0.0;
  double current_a = 0.0;
};

enum class IntegrationMethod {
  kSampleTrapezoid,  // trapezoid over consecutive samples
  kPerSegment,       // per commanded segment: mean of the samples inside × segment length
};
const char* IntegrationMethodName(IntegrationMethod m);
// A sentence for the report describing the method.
std::string IntegrationMethodText(IntegrationMethod m);

// Per-segment integration: for each commanded segment, the mean measured
// current (and power) of the samples whose time lies inside [t_start, t_end)
// times the segment's length. A segment with no sample inside falls back to
// its commanded current and the run's latest voltage; it is counted in
// `segments_without_samples`.
struct SegmentIntegration {
  double charge_mah = 0.0;
  double energy_wh = 0.0;
  size_t segments = 0;
  size_t segments_without_samples = 0;
};
SegmentIntegration IntegrateBySegments(SampleSpan samples, std::span<const CommandedSegment> segments);

// Sample trapezoid unless the samples are sparser than the commanded
// segments (median sample spacing longer than half the shortest segment, so a
// segment may hold no sample or a single sample at an arbitrary phase).
IntegrationMethod ChooseIntegrationMethod(SampleSpan samples, std::span<const CommandedSegment> segments);

// Median spacing between consecutive samples (0 for fewer than 2 samples);
// over at most 4,096 evenly strided intervals on long records.
double MedianSpacingS(SampleSpan samples);

}  // namespace kp
