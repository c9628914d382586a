#include "analysis/duration_format.h"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>

namespace kp {
namespace {

constexpr double kMinute = 60, kHour = 3600, kDay = 86400;

// Round steps a reader can count in: seconds, minutes, hours, days.
constexpr double kSteps[] = {1,          2,          5,          10,         15,         30,        kMinute,
                             2 * kMinute, 5 * kMinute, 10 * kMinute, 15 * kMinute, 30 * kMinute, kHour, 2 * kHour,
                             3 * kHour,  6 * kHour,  12 * kHour, kDay,       2 * kDay,   7 * kDay,  14 * kDay};

}  // namespace

std::string FormatHms(double seconds) {
  if (!std::isfinite(seconds)) return "-";
  std::string sign = seconds < 0 && std::lround(std::fabs(seconds)) > 0 ? "-" : "";
  long long s = std::llround(std::fabs(seconds));
  long long d = s / 86400, h = (s / 3600) % 24, m = (s / 60) % 60, r = s % 60;
  if (d > 0) return fmt::format("{}{} d {:02}:{:02}:{:02}", sign, d, h, m, r);
  return fmt::format("{}{}:{:02}:{:02}", sign, h, m, r);
}

std::string FormatDurationTick(double t, const std::string& format) {
  if (format == "s") return fmt::format("{:g}", t);
  std::string sign = t < 0 && std::llround(std::fabs(t)) > 0 ? "-" : "";
  long long s = std::llround(std::fabs(t));
  long long d = s / 86400, h = s / 3600, m = (s / 60) % 60, r = s % 60;
  if (format == "m:ss") return fmt::format("{}{}:{:02}", sign, s / 60, r);
  if (format == "h:mm:ss") return fmt::format("{}{}:{:02}:{:02}", sign, h, m, r);
  if (format == "h:mm") return fmt::format("{}{}:{:02}", sign, h, m);
  // "d h:mm": whole days alone, otherwise the day and the time of day.
  long long hd = h % 24;
  if (hd == 0 && m == 0) return fmt::format("{}{} d", sign, d);
  if (d == 0) return fmt::format("{}{}:{:02}", sign, hd, m);
  return fmt::format("{}{} d {:02}:{:02}", sign, d, hd, m);
}

DurationTicks NiceDurationTicks(double lo, double hi, int target) {
  DurationTicks t;
  if (!(hi > lo) || !std::isfinite(lo) || !std::isfinite(hi)) {
    t.at_s = {std::isfinite(lo) ? lo : 0.0};
    t.format = "h:mm:ss";
    return t;
  }
  double raw = (hi - lo) / std::max(1, target);
  double step = 0;
  if (raw < 1.0) {
    // Below a second: decimal steps, labelled in seconds.
    double mag = std::pow(10.0, std::floor(std::log10(raw)));
    step = mag;
    for (double m : {1.0, 2.0, 5.0, 10.0})
      if (m * mag >= raw) {
        step = m * mag;
        break;
      }
    t.format = "s";
  } else {
    step = std::ceil(raw / (7 * kDay)) * 7 * kDay;
    for (double s : kSteps)
      if (s >= raw) {
        step = s;
        break;
      }
    double span_end = std::max(std::fabs(lo), std::fabs(hi));
    if (step < kMinute)
      t.format = span_end < kHour ? "m:ss" : "h:mm:ss";
    else if (span_end <= kHour)
      t.format = "m:ss";
    else if (span_end < 2 * kDay)
      t.format = "h:mm";
    else
      t.format = "d h:mm";
  }
  t.step_s = step;
  for (double v = std::ceil(lo / step - 1e-9) * step; v <= hi + step * 1e-9; v += step)
    t.at_s.push_back(std::fabs(v) < step * 1e-9 ? 0.0 : v);
  return t;
}

}  // namespace kp
