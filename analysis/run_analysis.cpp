#include "analysis/run_analysis.h"

#include <algorithm>
#include <cmath>

namespace kp {
namespace {

// The contiguous block of samples whose step index is `step` and which starts
// at t_start_s.
SampleSpan StepSamples(SampleSpan s, const StepFigures& f) {
  auto b = std::lower_bound(s.begin(), s.end(), f.t_start_s, [](const Sample& a, double t) { return a.t_s < t; });
  auto e = std::upper_bound(b, s.end(), f.t_end_s, [](double t, const Sample& a) { return t < a.t_s; });
  return SampleSpan(&*b, static_cast<size_t>(e - b));
}

double VoltageAt(SampleSpan s, double t) {
  auto it = std::lower_bound(s.begin(), s.end(), t, [](const Sample& a, double x) { return a.t_s < x; });
  if (it == s.end()) return s.back().voltage_v;
  if (it == s.begin()) return it->voltage_v;
  const Sample& a = *(it - 1);
  const Sample& b = *it;
  double w = b.t_s > a.t_s ? (t - a.t_s) / (b.t_s - a.t_s) : 0.0;
  return a.voltage_v + w * (b.voltage_v - a.voltage_v);
}

}  // namespace

RunAnalysis AnalyseRun(SampleSpan s, const RunContext& ctx) {
  RunAnalysis a;
  a.totals = ComputeRunFigures(s);
  a.steps = FiguresPerStep(s);
  a.gaps = FindGaps(s);
  for (const Gap& g : ctx.recorded_gaps) {
    bool dup = std::any_of(a.gaps.begin(), a.gaps.end(),
                           [&](const Gap& x) { return x.t_start_s <= g.t_end_s && g.t_start_s <= x.t_end_s; });
    if (!dup) a.gaps.push_back(g);
  }
  std::sort(a.gaps.begin(), a.gaps.end(), [](const Gap& x, const Gap& y) { return x.t_start_s < y.t_start_s; });
  if (s.empty()) {
    DischargeConditions none;
    none.rated_mah = ctx.rated_mah;
    a.verdict = JudgeCapacityByMethod(MethodForChemistry(ctx.chemistry), none);
    return a;
  }

  // The discharge span (see the header).
  a.method = ChooseIntegrationMethod(s, ctx.segments);
  size_t best_first = 0, best_last = 0;
  double best_mah = 0.0;
  for (size_t i = 0; i < a.steps.size();) {
    if (a.steps[i].charge_mah < -1e-9) {
      ++i;
      continue;
    }
    size_t j = i;
    while (j < a.steps.size() && a.steps[j].charge_mah >= -1e-9) ++j;
    size_t first = i, last = j;  // [first, last)
    while (first < last && !a.steps[first].discharging()) ++first;
    while (last > first && !a.steps[last - 1].discharging()) --last;
    double mah = 0;
    for (size_t k = first; k < last; ++k) mah += a.steps[k].charge_mah;
    if (last > first && mah > best_mah) best_mah = mah, best_first = first, best_last = last - 1;
    i = j;
  }
  SampleSpan d;
  if (best_mah > 0) {
    const StepFigures& f0 = a.steps[best_first];
    const StepFigures& f1 = a.steps[best_last];
    StepFigures span;
    span.t_start_s = f0.t_start_s;
    span.t_end_s = f1.t_end_s;
    d = StepSamples(s, span);
    a.main_discharge_step = f0.step;
    a.last_discharge_step = f1.step;
    a.discharge_start_s = f0.t_start_s;
    a.discharge_duration_s = f1.t_end_s - f0.t_start_s;
    for (size_t k = best_first; k <= best_last; ++k) {
      a.discharge_charge_mah += a.steps[k].charge_mah;
      a.discharge_energy_wh += a.steps[k].energy_wh;
    }
  }
  if (a.method == IntegrationMethod::kPerSegment) {
    std::vector<CommandedSegment> discharging;
    for (const CommandedSegment& g : ctx.segments)
      if (g.current_a >= 0) discharging.push_back(g);
    SegmentIntegration si = IntegrateBySegments(s, discharging);
    a.discharge_charge_mah = si.charge_mah;
    a.discharge_energy_wh = si.energy_wh;
  }

  a.start_temperature_c = s.front().temperature_c;
  a.max_temperature_c = a.totals.max_temperature_c;
  a.temperature_rise_c = a.max_temperature_c - a.start_temperature_c;

  DischargeConditions dc;
  dc.rated_mah = ctx.rated_mah;
  dc.delivered_mah = a.discharge_charge_mah;
  if (!d.empty()) {
    a.mean_voltage_v = MeanVoltage(d);
    a.mid_voltage_v = VoltageAt(d, a.discharge_start_s + 0.5 * a.discharge_duration_s);
    a.average_current_a = a.discharge_duration_s > 0 ? a.discharge_charge_mah * 3.6 / a.discharge_duration_s : 0.0;
    double lo_t = d.front().temperature_c, hi_t = lo_t, dev = 0.0;
    for (const Sample& x : d) {
      a.peak_current_a = std::max(a.peak_current_a, x.current_a);
      lo_t = std::min(lo_t, x.temperature_c);
      hi_t = std::max(hi_t, x.temperature_c);
      dev = std::max(dev, std::abs(x.current_a - a.average_current_a));
    }
    if (ctx.cutoff_v) {
      for (const Sample& x : d)
        if (x.voltage_v <= *ctx.cutoff_v) {
          a.time_to_cutoff_s = x.t_s - d.front().t_s;
          break;
        }
    }
    dc.mean_current_a = a.average_current_a;
    dc.max_current_deviation_a = dev;
    dc.start_temperature_c = d.front().temperature_c;
    dc.min_temperature_c = lo_t;
    dc.max_temperature_c = hi_t;
    dc.end_voltage_v = d.back().voltage_v;
    // Rest right before the discharge, from the recorded steps.
    for (size_t i = 1; i < ctx.steps.size(); ++i) {
      const StepBoundary& prev = ctx.steps[i - 1];
      if (ctx.steps[i].index == a.main_discharge_step && prev.kind == "rest" && prev.ended_s)
        dc.rest_before_s = *prev.ended_s - prev.started_s;
    }
  }
  // Pulses and DC-IR.
  std::vector<CommandedSegment> segs = ctx.segments;
  if (segs.empty() && !d.empty()) segs = SegmentsFromSamples(d, ctx.segment_tolerance_a);
  a.pulses = AnalysePulses(s, segs);
  a.pulsed = a.pulses.size() >= 2;
  if (!a.pulsed) a.pulses.clear();  // one high segment is a plain discharge
  dc.pulsed = a.pulsed;
  a.verdict = JudgeCapacityByMethod(MethodForChemistry(ctx.chemistry), dc);
  if (ctx.brownout_v) a.brownout = FirstBrownout(a.pulses, *ctx.brownout_v);
  std::vector<double> edges =
      ctx.segments.empty() ? EdgesFromSamples(s, ctx.dcir.min_step_a) : EdgesFromSegments(ctx.segments, ctx.dcir.min_step_a);
  double capacity = ctx.rated_mah > 0 ? ctx.rated_mah : a.discharge_charge_mah;
  a.dcir = MeasureDcir(s, edges, ctx.dcir, capacity);
  return a;
}

}  // namespace kp
