#include "analysis/life.h"

#include <fmt/format.h>

#include <algorithm>
#include <charconv>

#include "analysis/quantity.h"

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

namespace {

// Splits a line into words with their 1-based columns.
std::vector<std::pair<std::string_view, size_t>> Words(std::string_view line) {
  std::vector<std::pair<std::string_view, size_t>> w;
  size_t i = 0;
  while (i < line.size()) {
    while (i < line.size() && (line[i] == ' ' || line[i] == '\t' || line[i] == '\r')) ++i;
    size_t b = i;
    while (i < line.size() && line[i] != ' ' && line[i] != '\t' && line[i] != '\r') ++i;
    if (i > b) w.emplace_back(line.substr(b, i - b), b + 1);
  }
  return w;
}

}  // namespace

ProfileParse ParseDutyProfile(std::string_view text) {
  ProfileParse r;
  DutyProfile p;
  size_t line_no = 0;
  size_t pos = 0;
  auto fail = [&](size_t col, const std::string& msg) {
    r.error = fmt::format("{}:{}: {}", line_no, col, msg);
    return r;
  };
  while (pos <= text.size()) {
    size_t nl = text.find('\n', pos);
    std::string_view line = text.substr(pos, nl == std::string_view::npos ? std::string_view::npos : nl - pos);
    pos = nl == std::string_view::npos ? text.size() + 1 : nl + 1;
    ++line_no;
    if (size_t hash = line.find('#'); hash != std::string_view::npos) line = line.substr(0, hash);
    auto w = Words(line);
    if (w.empty()) continue;
    if (w[0].first == "compress") {
      if (w.size() != 2) return fail(w[0].second, "expected 'compress <factor>'");
      double f = 0;
      auto [ptr, ec] = std::from_chars(w[1].first.data(), w[1].first.data() + w[1].first.size(), f);
      if (ec != std::errc() || ptr != w[1].first.data() + w[1].first.size() || !(f >= 1.0))
        return fail(w[1].second, fmt::format("compression factor '{}' must be a number >= 1", w[1].first));
      p.compression_factor = f;
      continue;
    }
    if (w.size() < 3 || w[1].first != "for")
      return fail(w[0].second, "expected '<current> for <duration> [compressed]' or 'compress <factor>'");
    ProfileLevel l;
    ParsedQuantity i = ParseQuantity(w[0].first, QuantityKind::kCurrent);
    if (!i.value) return fail(w[0].second + i.error_column - 1, i.error);
    ParsedQuantity d = ParseQuantity(w[2].first, QuantityKind::kDuration);
    if (!d.value) return fail(w[2].second + d.error_column - 1, d.error);
    if (!(*d.value > 0)) return fail(w[2].second, "duration must be > 0");
    l.current_a = *i.value;
    l.duration_s = *d.value;
    if (w.size() >= 4) {
      if (w[3].first != "compressed" || w.size() > 4)
        return fail(w[3].second, fmt::format("unexpected '{}' (only 'compressed' may follow the duration)", w[3].first));
      l.compressed = true;
    }
    p.levels.push_back(l);
  }
  if (p.levels.empty()) {
    r.error = fmt::format("{}:1: the profile has no levels", line_no);
    return r;
  }
  r.profile = std::move(p);
  return r;
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
