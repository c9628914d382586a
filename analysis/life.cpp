#include "analysis/life.h"

#include <fmt/format.h>

#include <algorithm>
#include <charconv>


namespace kp {

double ProfileAverageCurrentA(const DutyProfile& p) {
  double q = 0, t = 0;
  for (const ProfileLevel& l : p.levels) {
    q += l.current_a * l.duration_s;
    t += l.duration_s;
  }
  return t > 0 ? q / t : 0.0;
}

double ProfileTestAverageCurrentA(const DutyProfile& p) {
  double q = 0, t = 0;
  for (const ProfileLevel& l : p.levels) {
    double d = l.compressed && p.compression_factor > 0 ? l.duration_s / p.compression_factor : l.duration_s;
    q += l.current_a * d;
    t += d;
  }
  return t > 0 ? q / t : 0.0;
}

double ProfilePeakCurrentA(const DutyProfile& p) {
  double m = 0;
  for (const ProfileLevel& l : p.levels) m = std::max(m, l.current_a);
  return m;
}

double ProfileCycleS(const DutyProfile& p) {
  double t = 0;
  for (const ProfileLevel& l : p.levels) t += l.duration_s;
  return t;
}


LifeOutcome ProjectLife(const LifeInputs& in) {
  LifeOutcome out;
  if (!(in.capacity_mah > 0)) {
    out.error = "capacity must be > 0";
    return out;
  }
  if (!(in.average_current_a > 0)) {
    out.error = "average current must be > 0";
    return out;
  }
  if (in.efficiency && !(*in.efficiency > 0 && *in.efficiency <= 1.0)) {
    out.error = fmt::format("efficiency {} must lie in (0, 1]", *in.efficiency);
    return out;
  }
  if (in.self_discharge_per_month && !(*in.self_discharge_per_month >= 0 && *in.self_discharge_per_month < 1.0)) {
    out.error = "self-discharge must lie in [0, 100 %) per month";
    return out;
  }
  LifeProjection p;
  p.average_current_a = in.average_current_a;
  p.capacity_mah = in.capacity_mah;
  p.battery_current_a = in.average_current_a;
  p.assumptions.push_back("capacity drawn at the battery's average current until empty; a year is 365.25 days");
  if (in.efficiency) {
    p.battery_current_a /= *in.efficiency;
    p.allowances.push_back("regulator-efficiency");
    p.assumptions.push_back(
        fmt::format("regulator efficiency {:.0f} %: battery current = load current / efficiency (voltage ratio ignored)",
                    *in.efficiency * 100.0));
  }
  if (in.quiescent_a) {
    p.battery_current_a += *in.quiescent_a;
    p.allowances.push_back("regulator-quiescent");
    p.assumptions.push_back(fmt::format("regulator quiescent current {:.3g} uA added to the drain", *in.quiescent_a * 1e6));
  }
  if (in.peukert) {
    p.capacity_mah = in.peukert->CapacityMahAt(p.battery_current_a);
    p.allowances.push_back("peukert-derating");
    p.assumptions.push_back(
        fmt::format("capacity derated with Peukert k = {:.3f} to {:.0f} mAh at the average current (an extrapolation when the "
                    "fitted runs used far larger currents)",
                    in.peukert->exponent_k, p.capacity_mah));
  }
  if (in.self_discharge_per_month) {
    p.self_discharge_a = *in.self_discharge_per_month * p.capacity_mah / 1000.0 / kHoursPerMonth;
    p.allowances.push_back("self-discharge");
    p.assumptions.push_back(
        fmt::format("self-discharge {:.3g} %/month of the starting capacity, as a constant extra drain of {:.3g} uA",
                    *in.self_discharge_per_month * 100.0, p.self_discharge_a * 1e6));
  }
  double drain_a = p.battery_current_a + p.self_discharge_a;
  p.hours = p.capacity_mah / 1000.0 / drain_a;
  p.years = p.hours / kHoursPerYear;
  if (p.allowances.empty()) p.assumptions.push_back("no self-discharge, regulator or rate allowance applied");
  out.projection = std::move(p);
  return out;
}

}  // namespace kp
