// The analysis as it was written before it streamed: random access over a
// run's samples held in memory. Kept in the tests as the batch recomputation
// the streaming analysis (analysis/run_analysis.h, RunStream) is checked
// against, figure by figure.
#include "tests/support/batch_analysis.h"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <map>

namespace kp::testing {
namespace {

constexpr double kEps = 1e-9;

// Samples with t in (a, b].
SampleSpan Owned(SampleSpan s, double a, double b) {
  auto first = std::upper_bound(s.begin(), s.end(), a, [](double t, const Sample& x) { return t < x.t_s; });
  auto last = std::upper_bound(first, s.end(), b, [](double t, const Sample& x) { return t < x.t_s; });
  return SampleSpan(&*s.begin() + (first - s.begin()), static_cast<size_t>(last - first));
}

// Index of the first sample with t > a (the first owned by an instance starting at a).
size_t FirstAfter(SampleSpan s, double a) {
  return static_cast<size_t>(std::upper_bound(s.begin(), s.end(), a, [](double t, const Sample& x) { return t < x.t_s; }) -
                             s.begin());
}

// Trapezoid over the intervals closing at samples [from, to).
struct Trap {
  double as = 0, ws = 0, vs = 0, span = 0;
};
Trap Trapezoid(SampleSpan s, size_t from, size_t to) {
  Trap t;
  for (size_t i = std::max<size_t>(from, 1); i < to; ++i) {
    double dt = s[i].t_s - s[i - 1].t_s;
    t.as += 0.5 * (s[i].current_a + s[i - 1].current_a) * dt;
    t.ws += 0.5 * (s[i].voltage_v * s[i].current_a + s[i - 1].voltage_v * s[i - 1].current_a) * dt;
    t.vs += 0.5 * (s[i].voltage_v + s[i - 1].voltage_v) * dt;
    t.span += dt;
  }
  return t;
}

double VoltageAt(SampleSpan s, double t) {
  if (s.empty()) return 0.0;
  auto it = std::lower_bound(s.begin(), s.end(), t, [](const Sample& a, double x) { return a.t_s < x; });
  if (it == s.end()) return s.back().voltage_v;
  if (it == s.begin()) return it->voltage_v;
  const Sample& a = *(it - 1);
  const Sample& b = *it;
  double w = b.t_s > a.t_s ? (t - a.t_s) / (b.t_s - a.t_s) : 0.0;
  return a.voltage_v + w * (b.voltage_v - a.voltage_v);
}

// The reading at (or last before) time t: the instrument state when a step began.
const Sample* ReadingAt(SampleSpan s, double t) {
  if (s.empty()) return nullptr;
  auto it = std::upper_bound(s.begin(), s.end(), t + kEps, [](double x, const Sample& a) { return x < a.t_s; });
  if (it == s.begin()) return &*it;
  return &*(it - 1);
}

InstanceFigures FiguresFor(SampleSpan s, const StepRecord& rec, double end_s) {
  InstanceFigures g;
  g.number = rec.index + 1;
  g.kind = rec.kind;
  g.cls = StepClassFromKind(rec.kind);
  g.pass = rec.pass;
  g.cycle = rec.cycle;
  g.started_s = rec.started_s;
  g.ended_s = end_s;
  g.end_reason = rec.end_reason;
  g.held_s = rec.held_s;
  g.level = rec.level;
  g.mode = rec.mode;
  StepFigures& f = g.f;
  f.step = rec.index;
  const size_t from = FirstAfter(s, rec.started_s);
  const size_t to = FirstAfter(s, end_s);
  f.samples = to - from;
  f.t_start_s = rec.started_s;
  f.t_end_s = to > from ? s[to - 1].t_s : end_s;
  if (to > from) {
    f.min_voltage_v = s[from].voltage_v;
    for (size_t i = from; i < to; ++i) f.min_voltage_v = std::min(f.min_voltage_v, s[i].voltage_v);
  }
  Trap t = Trapezoid(s, from, to);
  f.charge_mah = t.as / 3.6;
  f.energy_wh = t.ws / 3600.0;
  if (t.span > 0) {
    f.mean_current_a = t.as / t.span;
    f.mean_voltage_v = t.vs / t.span;
  } else if (to > from) {
    f.mean_current_a = s[from].current_a;
    f.mean_voltage_v = s[from].voltage_v;
  }
  // Pulse trains and duty cycles sampled more sparsely than their segments:
  // commanded segments × measured levels, for this step only.
  if ((g.cls == StepClass::kPulseTrain || g.cls == StepClass::kDutyCycle) && !rec.segments.empty() &&
      ChooseIntegrationMethod(s.subspan(from, to - from), rec.segments) == IntegrationMethod::kPerSegment) {
    SegmentIntegration si = IntegrateBySegments(s.subspan(from, to - from), rec.segments);
    g.method = IntegrationMethod::kPerSegment;
    f.charge_mah = si.charge_mah;
    f.energy_wh = si.energy_wh;
    const double len = end_s - rec.started_s;
    if (len > 0) f.mean_current_a = si.charge_mah * 3.6 / len;
  }
  return g;
}

}  // namespace

RunAnalysis BatchAnalyseRun(SampleSpan s, const RunContext& ctx) {
  RunAnalysis a;
  a.totals = ComputeRunFigures(s);
  a.gaps = FindGaps(s);
  for (const Gap& g : ctx.recorded_gaps) {
    bool dup = std::any_of(a.gaps.begin(), a.gaps.end(),
                           [&](const Gap& x) { return x.t_start_s <= g.t_end_s && g.t_start_s <= x.t_end_s; });
    if (!dup) a.gaps.push_back(g);
  }
  std::sort(a.gaps.begin(), a.gaps.end(), [](const Gap& x, const Gap& y) { return x.t_start_s < y.t_start_s; });
  DischargeConditions none;
  none.rated_mah = ctx.rated_mah;
  a.verdict = JudgeCapacityByMethod(MethodForChemistry(ctx.chemistry), none);
  if (s.empty()) return a;
  a.start_temperature_c = s.front().temperature_c;
  a.max_temperature_c = a.totals.max_temperature_c;
  a.temperature_rise_c = a.max_temperature_c - a.start_temperature_c;

  // --- step instances ---
  std::vector<StepRecord> recs = ctx.steps;
  if (recs.empty()) {
    // No records: the whole record is one instance of whatever the samples say.
    StepRecord r;
    r.index = s.front().step;
    bool any_charge = std::any_of(s.begin(), s.end(), [](const Sample& x) { return x.current_a < -1e-6; });
    r.kind = any_charge ? "unknown" : "constant-current discharge";
    r.started_s = s.front().t_s;
    r.ended_s = s.back().t_s;
    recs.push_back(r);
  }
  for (size_t k = 0; k < recs.size(); ++k) {
    // An instance without a recorded end (the run died in it) ends where the next begins or the record ends.
    double end = recs[k].ended_s ? *recs[k].ended_s : (k + 1 < recs.size() ? recs[k + 1].started_s : s.back().t_s);
    a.instances.push_back(FiguresFor(s, recs[k], end));
    a.steps.push_back(a.instances.back().f);
  }

  // --- discharges, split at charges ---
  const CapacityMethod method = MethodForChemistry(ctx.chemistry);
  const std::vector<InstanceFigures>& in = a.instances;
  for (const DischargeSpan& span : DischargeSpans(recs, s.back().t_s)) {
    {
      DischargeFigures d;
      d.first = span.first;
      d.last = span.last;
      const size_t first_k = span.first, last_k = span.last;
      d.cycle = in[first_k].cycle;
      d.start_s = in[first_k].started_s;
      d.end_s = in[last_k].ended_s;
      size_t judged = first_k;
      for (size_t k = first_k; k <= last_k; ++k) {
        const InstanceFigures& g = in[k];
        d.charge_mah += g.f.charge_mah;
        d.energy_wh += g.f.energy_wh;
        if (g.cls == StepClass::kPulseTrain || g.cls == StepClass::kDutyCycle) d.pulsed = true;
        if (g.method == IntegrationMethod::kPerSegment) d.method = IntegrationMethod::kPerSegment;
        if (IsDischargeClass(g.cls) && g.f.charge_mah > in[judged].f.charge_mah) judged = k;
        if (ReachedVoltageCutoff(g.end_reason)) d.reached_cutoff = true;
      }
      if (ReachedVoltageCutoff(in[last_k].end_reason)) judged = last_k;
      d.judged = judged;
      SampleSpan ds = Owned(s, d.start_s, d.end_s);
      const double dur = d.end_s - d.start_s;
      if (!ds.empty()) {
        // Time-weighted over the owned samples, bridging from the reading at the start.
        size_t from = FirstAfter(s, d.start_s), to = FirstAfter(s, d.end_s);
        Trap t = Trapezoid(s, from, to);
        d.mean_voltage_v = t.span > 0 ? t.vs / t.span : ds.front().voltage_v;
        d.mid_voltage_v = VoltageAt(ds, d.start_s + 0.5 * dur);
        d.min_voltage_v = ds.front().voltage_v;
        for (const Sample& x : ds) {
          d.peak_current_a = std::max(d.peak_current_a, x.current_a);
          d.min_voltage_v = std::min(d.min_voltage_v, x.voltage_v);
        }
        if (ctx.cutoff_v) {
          for (const Sample& x : ds)
            if (x.voltage_v <= *ctx.cutoff_v) {
              d.time_to_cutoff_s = x.t_s - d.start_s;
              break;
            }
        }
        if (!d.time_to_cutoff_s && ReachedVoltageCutoff(in[last_k].end_reason)) d.time_to_cutoff_s = dur;
      }
      d.average_current_a = dur > 0 ? d.charge_mah * 3.6 / dur : 0.0;
      if (const Sample* at = ReadingAt(s, d.start_s)) d.start_temperature_c = at->temperature_c;

      // The capacity judgement of this discharge, on its judged step.
      bool cc = false;
      std::string not_cc;
      d.description = d.pulsed ? "pulsed" : DescribeDischarge(in, d.first, d.last, ctx.rated_mah, cc, not_cc);
      const InstanceFigures& js = in[judged];
      DischargeConditions dc;
      dc.rated_mah = ctx.rated_mah;
      dc.delivered_mah = d.charge_mah;
      dc.pulsed = d.pulsed;
      dc.not_constant_current = d.pulsed ? "" : not_cc;
      dc.temperature_tolerance_c = ctx.temperature_tolerance_c;
      if (js.cls == StepClass::kConstantCurrent && js.level) dc.commanded_current_a = js.level;
      SampleSpan jsamp = Owned(s, js.started_s, js.ended_s);
      if (!jsamp.empty()) {
        dc.mean_current_a = js.f.mean_current_a;
        const double ref = dc.commanded_current_a.value_or(js.f.mean_current_a);
        double lo_t = jsamp.front().temperature_c, hi_t = lo_t, dev = 0.0;
        for (const Sample& x : jsamp) {
          lo_t = std::min(lo_t, x.temperature_c);
          hi_t = std::max(hi_t, x.temperature_c);
          dev = std::max(dev, std::abs(x.current_a - ref));
        }
        dc.max_current_deviation_a = dev;
        const Sample* at = ReadingAt(s, js.started_s);
        dc.start_temperature_c = at ? at->temperature_c : jsamp.front().temperature_c;
        dc.min_temperature_c = std::min(lo_t, dc.start_temperature_c);
        dc.max_temperature_c = std::max(hi_t, dc.start_temperature_c);
        dc.end_voltage_v = Owned(s, d.start_s, d.end_s).back().voltage_v;
      }
      // The rest right before the discharge.
      if (d.first > 0 && in[d.first - 1].cls == StepClass::kRest)
        dc.rest_before_s = in[d.first - 1].ended_s - in[d.first - 1].started_s;
      d.judgement = JudgeCapacityByMethod(method, dc);
      a.discharges.push_back(std::move(d));
    }
  }

  // Attempts, the main discharge and cycles: the shared logic over the figures.
  SettleAttemptsAndCycles(a, ctx);
  const std::optional<size_t> chosen = a.main_discharge;

  // --- pulses (inside the main discharge's pulse and duty steps) ---
  if (chosen) {
    const DischargeFigures& d = a.discharges[*chosen];
    std::vector<CommandedSegment> segs;
    for (size_t k = d.first; k <= d.last; ++k) segs.insert(segs.end(), recs[k].segments.begin(), recs[k].segments.end());
    if (d.pulsed && !segs.empty()) a.pulses = AnalysePulses(s, segs);
    if (ctx.brownout_v) a.brownout = FirstBrownout(a.pulses, *ctx.brownout_v);
  }

  // --- DC-IR: only at commanded edges inside dcir, pulse and duty steps ---
  std::vector<DcirPoint> pts;
  if (ctx.dcir_recorded) {
    pts = ctx.engine_dcir;
    std::map<std::string, int> why;
    for (const std::string& w : ctx.dcir_invalid) ++why[w];
    for (auto& [w, n] : why) a.dcir_left_out.push_back({w, n});
  } else {
    std::vector<double> edges;
    for (size_t k = 0; k < recs.size(); ++k) {
      const StepClass c = in[k].cls;
      if (c == StepClass::kPulseTrain || c == StepClass::kDutyCycle || c == StepClass::kDcir) {
        std::vector<double> e = EdgesFromSegments(recs[k].segments, ctx.dcir.min_step_a);
        for (double t : e)
          if (t > in[k].started_s + kEps && t < in[k].ended_s - kEps) edges.push_back(t);
      }
    }
    std::sort(edges.begin(), edges.end());
    pts = MeasureDcir(s, edges, ctx.dcir, ctx.rated_mah > 0 ? ctx.rated_mah : a.discharge_charge_mah);
  }
  // Charge delivered before each point: from the start of the discharge it
  // lies in (from the end of the last charge), trapezoid over the samples.
  const double capacity = ctx.rated_mah > 0 ? ctx.rated_mah : a.discharge_charge_mah;
  for (DcirPoint& p : pts) {
    double start = 0.0;
    for (const InstanceFigures& g : in)
      if (g.cls == StepClass::kCharge && g.ended_s <= p.t_edge_s) start = g.ended_s;
    size_t from = FirstAfter(s, start), to = FirstAfter(s, p.t_edge_s);
    p.delivered_mah = Trapezoid(s, from, to).as / 3.6;
    p.depth_of_discharge = capacity > 0 ? std::clamp(p.delivered_mah / capacity, 0.0, 1.0) : 0.0;
  }
  a.dcir = std::move(pts);
  return a;
}

}  // namespace kp::testing
