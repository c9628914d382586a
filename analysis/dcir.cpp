#include "analysis/dcir.h"

#include <algorithm>
#include <cmath>
#include <limits>

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
  for (size_t e = 0; e < edges.size(); ++e) {
    const double te = edges[e];
    // before: last sample with t < te
    auto it = std::lower_bound(s.begin(), s.end(), te, [](const Sample& a, double t) { return a.t_s < t; });
    if (it == s.begin()) continue;
    size_t before = static_cast<size_t>(it - s.begin()) - 1;
    auto jt = std::lower_bound(it, s.end(), te + o.delay_s, [](const Sample& a, double t) { return a.t_s < t; });
    // U2 belongs to the I2 level: when the delay reaches the next edge (a 1 s
    // pulse read at 1 s), take the last sample before that edge instead, the
    // end of t2 where the two-current method reads U2.
    const double next_edge = e + 1 < edges.size() ? edges[e + 1] : std::numeric_limits<double>::infinity();
    if (jt == s.end() && !(next_edge <= s.back().t_s)) continue;  // the record ends inside t2
    if (jt == s.end() || jt->t_s >= next_edge) {
      auto kt = std::lower_bound(it, s.end(), next_edge, [](const Sample& a, double t) { return a.t_s < t; });
      if (kt == it) continue;  // no sample inside the I2 level
      jt = kt - 1;
    }
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
    p.t_u2_s = s[after].t_s;
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
