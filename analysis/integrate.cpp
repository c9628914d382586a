#include "analysis/integrate.h"

#include <algorithm>
#include <limits>

namespace kp {
namespace {

double Median(std::vector<double>& v) {
  if (v.empty()) return 0.0;
  auto mid = v.begin() + static_cast<std::ptrdiff_t>(v.size() / 2);
  std::nth_element(v.begin(), mid, v.end());
  return *mid;
}

}  // namespace

std::vector<StepFigures> FiguresPerStep(SampleSpan s) {
  std::vector<StepFigures> out;
  if (s.empty()) return out;
  // Accumulators in SI (A·s, W·s, V·s) for the current step.
  double as = 0.0, ws = 0.0, vs = 0.0, span_s = 0.0;
  auto open = [&](size_t i) {
    StepFigures f;
    f.step = s[i].step;
    f.t_start_s = f.t_end_s = s[i].t_s;
    f.min_voltage_v = s[i].voltage_v;
    f.mean_voltage_v = s[i].voltage_v;
    f.samples = 1;
    out.push_back(f);
    as = ws = vs = span_s = 0.0;
  };
  auto close = [&] {
    StepFigures& f = out.back();
    f.charge_mah = as / 3.6;
    f.energy_wh = ws / 3600.0;
    if (span_s > 0) {
      f.mean_current_a = as / span_s;
      f.mean_voltage_v = vs / span_s;
    }
  };
  open(0);
  for (size_t i = 1; i < s.size(); ++i) {
    if (s[i].step != out.back().step) {
      close();
      open(i);
    } else {
      ++out.back().samples;
      out.back().min_voltage_v = std::min(out.back().min_voltage_v, s[i].voltage_v);
    }
    double dt = s[i].t_s - s[i - 1].t_s;
    as += 0.5 * (s[i].current_a + s[i - 1].current_a) * dt;
    ws += 0.5 * (s[i].voltage_v * s[i].current_a + s[i - 1].voltage_v * s[i - 1].current_a) * dt;
    vs += 0.5 * (s[i].voltage_v + s[i - 1].voltage_v) * dt;
    span_s += dt;
    out.back().t_end_s = s[i].t_s;
  }
  close();
  return out;
}

namespace {

// Median spacing of the intervals closing at samples [first, end): exact up
// to kMaxProbe intervals, else over kMaxProbe evenly strided ones (enough
// for a gap threshold, and keeps a million-sample run cheap).
constexpr size_t kMaxProbe = 4096;

double MedianSpacing(SampleSpan s, size_t first, size_t end, std::vector<double>& scratch) {
  scratch.clear();
  if (end <= first) return 0.0;
  size_t n = end - first;
  size_t stride = n > kMaxProbe ? n / kMaxProbe : 1;
  for (size_t i = first; i < end; i += stride) scratch.push_back(s[i].t_s - s[i - 1].t_s);
  return Median(scratch);
}

}  // namespace

double MedianSpacingS(SampleSpan s) {
  if (s.size() < 2) return 0.0;
  std::vector<double> scratch;
  return MedianSpacing(s, 1, s.size(), scratch);
}

std::vector<Gap> FindGaps(SampleSpan s, const GapOptions& o) {
  std::vector<Gap> gaps;
  size_t begin = 0;
  std::vector<double> scratch;
  scratch.reserve(kMaxProbe + 1);
  while (begin < s.size()) {
    size_t end = begin + 1;
    while (end < s.size() && s[end].step == s[begin].step) ++end;
    // Intervals closing at samples begin+1 .. end-1 (inside the step) plus the
    // one closing at `begin` (bridging from the previous step).
    size_t first = begin == 0 ? 1 : begin;
    double med = MedianSpacing(s, first, end, scratch);
    double limit = std::max(o.factor * med, o.min_gap_s);
    for (size_t i = first; i < end; ++i) {
      double d = s[i].t_s - s[i - 1].t_s;
      if (d > limit) gaps.push_back({s[i - 1].t_s, s[i].t_s, s[i].step});
    }
    begin = end;
  }
  return gaps;
}

const char* IntegrationMethodName(IntegrationMethod m) {
  switch (m) {
    case IntegrationMethod::kSampleTrapezoid:
      return "sample-trapezoid";
    case IntegrationMethod::kPerSegment:
      return "per-commanded-segment";
  }
  return "?";
}

std::string IntegrationMethodText(IntegrationMethod m) {
  switch (m) {
    case IntegrationMethod::kSampleTrapezoid:
      return "trapezoidal integration of current and power over the actual sample times";
    case IntegrationMethod::kPerSegment:
      return "per commanded segment: mean of the samples inside each segment times the segment length "
             "(samples are sparser than the commanded segments)";
  }
  return "?";
}

SegmentIntegration IntegrateBySegments(SampleSpan s, std::span<const CommandedSegment> segs) {
  SegmentIntegration r;
  size_t i = 0;
  double last_v = s.empty() ? 0.0 : s.front().voltage_v;
  double as = 0.0, ws = 0.0;
  for (const CommandedSegment& g : segs) {
    double len = g.t_end_s - g.t_start_s;
    if (len <= 0) continue;
    ++r.segments;
    // A reading exactly on an edge is taken before the new setpoint goes out
    // (the engine's convention), so it belongs to the segment that ends there:
    // a segment owns the samples in (start, end].
    while (i < s.size() && s[i].t_s <= g.t_start_s) last_v = s[i++].voltage_v;
    double sum_i = 0.0, sum_p = 0.0;
    size_t n = 0;
    for (size_t j = i; j < s.size() && s[j].t_s <= g.t_end_s; ++j) {
      sum_i += s[j].current_a;
      sum_p += s[j].current_a * s[j].voltage_v;
      last_v = s[j].voltage_v;
      ++n;
    }
    if (n == 0) {
      ++r.segments_without_samples;
      as += g.current_a * len;
      ws += g.current_a * last_v * len;
    } else {
      as += sum_i / static_cast<double>(n) * len;
      ws += sum_p / static_cast<double>(n) * len;
    }
  }
  r.charge_mah = as / 3.6;
  r.energy_wh = ws / 3600.0;
  return r;
}

IntegrationMethod ChooseIntegrationMethod(SampleSpan s, std::span<const CommandedSegment> segs) {
  if (segs.empty() || s.size() < 2) return IntegrationMethod::kSampleTrapezoid;
  double shortest = std::numeric_limits<double>::infinity();
  for (const CommandedSegment& g : segs)
    if (g.t_end_s > g.t_start_s) shortest = std::min(shortest, g.t_end_s - g.t_start_s);
  return MedianSpacingS(s) > 0.5 * shortest ? IntegrationMethod::kPerSegment : IntegrationMethod::kSampleTrapezoid;
}

}  // namespace kp
