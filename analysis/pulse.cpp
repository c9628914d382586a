#include "analysis/pulse.h"

#include <algorithm>
#include <cmath>

namespace kp {

std::vector<PulseFigures> AnalysePulses(SampleSpan s, std::span<const CommandedSegment> segs, std::optional<double> threshold_a) {
  std::vector<PulseFigures> out;
  if (segs.empty() || s.empty()) return out;
  double thr;
  if (threshold_a) {
    thr = *threshold_a;
  } else {
    auto [lo, hi] = std::minmax_element(
        segs.begin(), segs.end(), [](const CommandedSegment& a, const CommandedSegment& b) { return a.current_a < b.current_a; });
    if (hi->current_a <= lo->current_a) return out;  // constant current: no pulses
    thr = 0.5 * (lo->current_a + hi->current_a);
  }
  std::vector<size_t> pulse_idx;
  for (size_t i = 0; i < segs.size(); ++i)
    if (segs[i].current_a > thr) pulse_idx.push_back(i);

  size_t k = 0;  // integration cursor
  double as = 0.0;
  size_t cursor = 0;  // first sample not before the current pulse
  for (size_t n = 0; n < pulse_idx.size(); ++n) {
    const CommandedSegment& g = segs[pulse_idx[n]];
    while (cursor < s.size() && s[cursor].t_s < g.t_start_s) ++cursor;
    PulseFigures p;
    p.t_start_s = g.t_start_s;
    p.t_end_s = g.t_end_s;
    p.current_a = g.current_a;
    p.rest_voltage_before_v = cursor > 0 ? s[cursor - 1].voltage_v : s[cursor < s.size() ? cursor : 0].voltage_v;
    size_t j = cursor;
    bool any = false;
    for (; j < s.size() && s[j].t_s < g.t_end_s; ++j) {
      p.min_voltage_v = any ? std::min(p.min_voltage_v, s[j].voltage_v) : s[j].voltage_v;
      any = true;
      ++p.samples;
    }
    if (!any) continue;
    double next_start = n + 1 < pulse_idx.size() ? segs[pulse_idx[n + 1]].t_start_s : s.back().t_s + 1.0;
    size_t r = j;
    while (r < s.size() && s[r].t_s < next_start) ++r;
    p.recovered_voltage_v = r > j ? s[r - 1].voltage_v : s[j - 1].voltage_v;
    p.recovery_v = p.recovered_voltage_v - p.min_voltage_v;
    // Charge up to the pulse start: trapezoid up to the last sample before it.
    size_t before = cursor > 0 ? cursor - 1 : 0;
    while (k < before) {
      as += 0.5 * (s[k].current_a + s[k + 1].current_a) * (s[k + 1].t_s - s[k].t_s);
      ++k;
    }
    p.delivered_mah_at_start = as / 3.6;
    p.index = static_cast<int>(out.size());
    out.push_back(p);
  }
  return out;
}

std::vector<CommandedSegment> SegmentsFromSamples(SampleSpan s, double tol) {
  std::vector<CommandedSegment> out;
  if (s.empty()) return out;
  size_t start = 0;
  double sum = s[0].current_a;
  for (size_t i = 1; i <= s.size(); ++i) {
    if (i == s.size() || std::abs(s[i].current_a - s[start].current_a) > tol) {
      double end_t = i == s.size() ? s.back().t_s : s[i].t_s;
      out.push_back({s[start].t_s, end_t, sum / static_cast<double>(i - start)});
      if (i == s.size()) break;
      start = i;
      sum = 0.0;
    }
    sum += s[i].current_a;
  }
  return out;
}

std::optional<Brownout> FirstBrownout(std::span<const PulseFigures> pulses, double brownout_v) {
  for (const PulseFigures& p : pulses)
    if (p.min_voltage_v < brownout_v) return Brownout{p.index, p.t_start_s, p.min_voltage_v, p.delivered_mah_at_start};
  return std::nullopt;
}

}  // namespace kp
