// Durations for people and time-axis ticks whose labels match their step.
#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>

#include "analysis/duration_format.h"

namespace kp {
namespace {

TEST(DurationFormat, HoursMinutesSeconds) {
  EXPECT_EQ(FormatHms(0), "0:00:00");
  EXPECT_EQ(FormatHms(42.4), "0:00:42");
  EXPECT_EQ(FormatHms(25025), "6:57:05");  // 6 h 57 min 5 s
  EXPECT_EQ(FormatHms(86399.6), "1 d 00:00:00");  // rounds up into the next day
  EXPECT_EQ(FormatHms(3 * 86400 + 4 * 3600 + 10 * 60), "3 d 04:10:00");
  EXPECT_EQ(FormatHms(-90), "-0:01:30");
  EXPECT_EQ(FormatHms(-0.2), "0:00:00");  // no negative zero
}

// Every tick is a whole multiple of the step, and its label, read back,
// gives the tick's time: labels match their ticks at every zoom.
double ReadBack(const std::string& label, const std::string& format) {
  if (format == "s") return std::stod(label);
  bool neg = !label.empty() && label[0] == '-';
  std::string t = neg ? label.substr(1) : label;
  double days = 0;
  if (size_t d = t.find(" d"); d != std::string::npos) {
    days = std::stod(t.substr(0, d));
    t = d + 2 < t.size() ? t.substr(d + 3) : "0:00";
  }
  int a = 0, b = 0, c = 0;
  int n = std::sscanf(t.c_str(), "%d:%d:%d", &a, &b, &c);
  double s = 0;
  if (format == "m:ss") s = a * 60.0 + b;
  else if (format == "h:mm:ss") s = a * 3600.0 + b * 60.0 + c;
  else s = a * 3600.0 + b * 60.0;  // "h:mm", "d h:mm"
  EXPECT_GE(n, 2) << label;
  return (neg ? -1 : 1) * (days * 86400 + s);
}

TEST(DurationFormat, TicksAndLabelsAgreeAtEveryZoom) {
  struct Case {
    double lo, hi;
    std::string format;
  };
  // A 9-minute run reads m:ss (not h:mm), a 5-hour run h:mm, a month d h:mm.
  for (const Case& c : std::vector<Case>{{0, 0.8, "s"},
                                         {0, 45, "m:ss"},
                                         {0, 540, "m:ss"},
                                         {0, 3500, "m:ss"},
                                         {3590, 3660, "h:mm:ss"}, {3000, 3700, "h:mm"},
                                         {0, 5 * 3600, "h:mm"},
                                         {0, 30 * 3600, "h:mm"},
                                         {0, 30 * 86400, "d h:mm"},
                                         {7200, 7230, "h:mm:ss"}}) {
    DurationTicks t = NiceDurationTicks(c.lo, c.hi);
    EXPECT_EQ(t.format, c.format) << c.lo << " .. " << c.hi;
    ASSERT_GE(t.at_s.size(), 3u) << c.lo << " .. " << c.hi;
    EXPECT_LE(t.at_s.size(), 13u);
    for (size_t k = 0; k < t.at_s.size(); ++k) {
      double v = t.at_s[k];
      EXPECT_GE(v, c.lo - 1e-9);
      EXPECT_LE(v, c.hi + 1e-9);
      EXPECT_NEAR(v / t.step_s, std::round(v / t.step_s), 1e-9);
      if (k > 0) EXPECT_NEAR(v - t.at_s[k - 1], t.step_s, 1e-9);
      std::string label = FormatDurationTick(v, t.format);
      EXPECT_NEAR(ReadBack(label, t.format), v, 1e-6) << label;
      if (k > 0) EXPECT_NE(label, FormatDurationTick(t.at_s[k - 1], t.format)) << "two ticks, one label";
    }
  }
}

}  // namespace
}  // namespace kp
