// Durations for people: h:mm:ss figures and round time-axis ticks whose labels
// match their step. Pure functions, shared by the HTML plots, the text reports
// and the panel's axes.
#pragma once

#include <string>
#include <vector>

namespace kp {

// Ticks for a time axis over [lo_s, hi_s] seconds: round steps (1 s ... 30 s,
// 1 min ... 30 min, 1 h ... 12 h, 1 d ...), about `target` of them, and the
// label format that matches the step (see FormatDurationTick).
struct DurationTicks {
  std::vector<double> at_s;
  double step_s = 1;
  std::string format;  // "m:ss", "h:mm:ss", "h:mm" or "d h:mm"
};
DurationTicks NiceDurationTicks(double lo_s, double hi_s, int target = 6);
std::string FormatDurationTick(double seconds, const std::string& format);

// A duration for people: "0:42", "2:05:09", "3 d 04:10:00" (h:mm:ss, days when
// over 24 h); negative values keep their sign.
std::string FormatHms(double seconds);

}  // namespace kp
