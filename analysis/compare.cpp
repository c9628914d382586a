#include "analysis/compare.h"

#include <cmath>

namespace kp {
namespace {

bool Near(double a, double b, double tol) { return b > 0 && std::abs(a - b) <= tol * b; }

}  // namespace

std::vector<RatioFigures> PulsedVersusContinuous(std::span<const RunSummary> runs, double tol) {
  std::vector<RatioFigures> out;
  for (const RunSummary& p : runs) {
    if (!p.pulsed) continue;
    for (const RunSummary& c : runs) {
      if (c.pulsed || c.charge_mah <= 0 || c.energy_wh <= 0) continue;
      auto add = [&](const char* basis) {
        out.push_back({p.label, c.label, basis, p.charge_mah / c.charge_mah, p.energy_wh / c.energy_wh});
      };
      if (Near(c.average_current_a, p.average_current_a, tol)) add("equal average current");
      if (Near(c.average_current_a, p.peak_current_a, tol)) add("equal peak current");
    }
  }
  return out;
}

std::vector<RatePoint> RatePointsFromRuns(std::span<const RunSummary> runs) {
  std::vector<RatePoint> pts;
  for (const RunSummary& r : runs)
    if (!r.pulsed && r.constant_current && r.average_current_a > 0 && r.duration_s > 0) pts.push_back({r.average_current_a, r.duration_s / 3600.0});
  return pts;
}

}  // namespace kp
