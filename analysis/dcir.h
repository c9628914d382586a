// DC internal resistance at current steps (two-current method).
//
// IEC 61960-3 clause 7.7 (as restated by a secondary source): discharge at I1,
// read U1 at the end; step to I2, read U2 after a set time;
// R_dc = (U1 - U2) / (I2 - I1). Here U1/I1 come from the last sample before
// the edge and U2/I2 from the first sample at or after edge + delay. Pure
// functions, no I/O.
#pragma once

#include <span>
#include <vector>

#include "analysis/integrate.h"
#include "analysis/sample.h"

namespace kp {

struct DcirOptions {
  double delay_s = 1.0;      // time after the edge at which U2 is read
  double min_step_a = 0.05;  // smaller current changes are not treated as edges
};

struct DcirPoint {
  double t_edge_s = 0.0;
  double u1_v = 0.0, i1_a = 0.0;  // before the edge
  double u2_v = 0.0, i2_a = 0.0;  // delay after the edge (or the end of the I2 level, if sooner)
  double t_u2_s = 0.0;            // when U2 was read
  double resistance_ohm = 0.0;
  double delivered_mah = 0.0;       // charge delivered before the edge
  double depth_of_discharge = 0.0;  // delivered / capacity (0..1); 0 when capacity unknown
};

// Times at which the commanded current changes by at least min_step_a.
std::vector<double> EdgesFromSegments(std::span<const CommandedSegment> segments, double min_step_a);
// Edges found in the samples themselves: the time of the first sample whose
// current differs from its predecessor by at least min_step_a.
std::vector<double> EdgesFromSamples(SampleSpan samples, double min_step_a);

// One point per edge that has a sample before it and one at edge + delay, and
// whose measured current change is at least min_step_a. U2 is never read past
// the next edge: when edge + delay reaches it, or the record ends first, U2 is
// the last sample before the next edge (the end of t2). `edge_times_s` must be
// sorted. delivered_mah counts
// from the fullest point of the record before the edge (after a charge step,
// from its end); capacity_mah scales the depth of discharge (pass the rated or
// the delivered capacity).
std::vector<DcirPoint> MeasureDcir(SampleSpan samples, std::span<const double> edge_times_s, const DcirOptions& options,
                                   double capacity_mah);

}  // namespace kp
