#include "analysis/dcir.h"

#include <algorithm>
#include <cmath>

namespace kp {

std::vector<double> EdgesFromSegments(std::span<const CommandedSegment> segs, double min_step_a) {
  std::vector<double> edges;
  for (size_t i = 1; i < segs.size(); ++i)
    if (std::abs(segs[i].current_a - segs[i - 1].current_a) >= min_step_a) edges.push_back(segs[i].t_start_s);
  return edges;
}

std::vector<double> EdgesFromSamples(SampleSpan s, double min_step_a) {
  std::vector<double> edges;
  for (size_t i = 1; i < s.size(); ++i)
    if (std::abs(s[i].current_a - s[i - 1].current_a) >= min_step_a) edges.push_back(s[i].t_s);
  return edges;
}

std::vector<DcirPoint> MeasureDcir(SampleSpan s, std::span<const double> edges, const DcirOptions& o, double capacity_mah) {
  std::vector<DcirPoint> out;
  if (s.size() < 2) return out;
  // Running charge up to sample k (trapezoid), advanced as edges move forward.
  // Depth of discharge counts from the fullest point so far (the lowest
  // running charge), so a record that starts with a charge step measures its
  // depth from the end of that charge, not from the empty cell it began with.
  size_t k = 0;
  double as = 0.0, fullest_as = 0.0;
  for (double te : edges) {
    // before: last sample with t < te
    auto it = std::lower_bound(s.begin(), s.end(), te, [](const Sample& a, double t) { return a.t_s < t; });
    if (it == s.begin()) continue;
    size_t before = static_cast<size_t>(it - s.begin()) - 1;
    auto jt = std::lower_bound(it, s.end(), te + o.delay_s, [](const Sample& a, double t) { return a.t_s < t; });
    if (jt == s.end()) continue;
    size_t after = static_cast<size_t>(jt - s.begin());
    while (k < before) {
      as += 0.5 * (s[k].current_a + s[k + 1].current_a) * (s[k + 1].t_s - s[k].t_s);
      fullest_as = std::min(fullest_as, as);
      ++k;
    }
    DcirPoint p;
    p.t_edge_s = te;
    p.u1_v = s[before].voltage_v;
    p.i1_a = s[before].current_a;
    p.u2_v = s[after].voltage_v;
    p.i2_a = s[after].current_a;
    double di = p.i2_a - p.i1_a;
    if (std::abs(di) < o.min_step_a) continue;
    p.resistance_ohm = (p.u1_v - p.u2_v) / di;
    p.delivered_mah = (as - fullest_as) / 3.6;
    p.depth_of_discharge = capacity_mah > 0 ? p.delivered_mah / capacity_mah : 0.0;
    out.push_back(p);
  }
  return out;
}

}  // namespace kp
