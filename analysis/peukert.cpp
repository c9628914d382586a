#include "analysis/peukert.h"

#include <fmt/format.h>

#include <cmath>
#include <vector>

namespace kp {

double PeukertFit::HoursAt(double current_a) const {
  return current_a > 0 ? capacity_constant / std::pow(current_a, exponent_k) : 0.0;
}

PeukertOutcome FitPeukert(std::span<const RatePoint> pts) {
  PeukertOutcome out;
  std::vector<double> x, y;
  for (const RatePoint& p : pts) {
    if (!(p.current_a > 0) || !(p.hours > 0)) {
      out.error = fmt::format("a run at {} A lasting {} h cannot enter a Peukert fit (both must be > 0)", p.current_a, p.hours);
      return out;
    }
    x.push_back(std::log(p.current_a));
    y.push_back(std::log(p.hours));
  }
  const double n = static_cast<double>(x.size());
  if (x.size() < 2) {
    out.error = "a Peukert fit needs runs at two or more different constant currents";
    return out;
  }
  double mx = 0, my = 0;
  for (size_t i = 0; i < x.size(); ++i) mx += x[i], my += y[i];
  mx /= n;
  my /= n;
  double sxx = 0, sxy = 0, syy = 0;
  for (size_t i = 0; i < x.size(); ++i) {
    sxx += (x[i] - mx) * (x[i] - mx);
    sxy += (x[i] - mx) * (y[i] - my);
    syy += (y[i] - my) * (y[i] - my);
  }
  if (sxx <= 0) {
    out.error = "a Peukert fit needs runs at two or more different constant currents";
    return out;
  }
  double slope = sxy / sxx;
  double intercept = my - slope * mx;
  double ss_res = 0;
  for (size_t i = 0; i < x.size(); ++i) {
    double r = y[i] - (intercept + slope * x[i]);
    ss_res += r * r;
  }
  PeukertFit f;
  f.exponent_k = -slope;
  f.capacity_constant = std::exp(intercept);
  f.r_squared = syy > 0 ? 1.0 - ss_res / syy : 1.0;
  f.points = x.size();
  out.fit = f;
  return out;
}

}  // namespace kp
