// Helpers shared by the simulator tests: direct discharges of a CellModel.
#pragma once

#include <cmath>
#include <vector>

#include "drivers/sim/cell_model.h"

namespace kp::sim::testing {

// Terminal voltage of `m` while `current_a` flows.
inline double TerminalV(const CellModel& m, double current_a) {
  Thevenin t = m.Equivalent();
  return t.emf_v - current_a * t.r_ohm;
}

// Discharges at constant current in `dt_s` steps until the terminal voltage
// reaches `cutoff_v`; returns the charge delivered in mAh.
inline double DischargeMah(CellModel& m, double current_a, double cutoff_v, double dt_s = 1.0) {
  double q_as = 0.0;
  for (long i = 0; i < 100000000L; ++i) {
    if (TerminalV(m, current_a) <= cutoff_v) break;
    m.Advance(dt_s, current_a);
    q_as += current_a * dt_s;
  }
  return q_as / 3.6;
}

// Least-squares slope of ln(y) against ln(x).
inline double LogLogSlope(const std::vector<double>& x, const std::vector<double>& y) {
  double n = static_cast<double>(x.size()), sx = 0, sy = 0, sxx = 0, sxy = 0;
  for (size_t i = 0; i < x.size(); ++i) {
    double lx = std::log(x[i]), ly = std::log(y[i]);
    sx += lx, sy += ly, sxx += lx * lx, sxy += lx * ly;
  }
  return (n * sxy - sx * sy) / (n * sxx - sx * sx);
}

}  // namespace kp::sim::testing
