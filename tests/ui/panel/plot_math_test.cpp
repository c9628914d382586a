#include "ui/panel/plot_math.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <random>
#include <set>
#include <string>
#include <cstdio>

namespace kp::ui {
namespace {

TEST(NiceTicks, UsesOneTwoFiveSteps) {
  Ticks t = NiceTicks(2.7, 4.25, 6);
  EXPECT_DOUBLE_EQ(t.step, 0.2);  // raw 0.258 -> 0.2
  ASSERT_FALSE(t.values.empty());
  EXPECT_NEAR(t.values.front(), 2.8, 1e-12);
  EXPECT_NEAR(t.values.back(), 4.2, 1e-12);
  for (double v : t.values) {
    EXPECT_GE(v, 2.7);
    EXPECT_LE(v, 4.25);
  }
  EXPECT_DOUBLE_EQ(NiceTicks(0, 1000, 4).step, 200.0);
  EXPECT_DOUBLE_EQ(NiceTicks(0, 1000, 2).step, 500.0);
  EXPECT_TRUE(NiceTicks(1, 1, 5).values.empty());
}

TEST(NiceTicks, NoNegativeZero) {
  Ticks t = NiceTicks(-1.0, 1.0, 4);
  bool has_zero = false;
  for (double v : t.values)
    if (v == 0.0) {
      has_zero = true;
      EXPECT_FALSE(std::signbit(v));
    }
  EXPECT_TRUE(has_zero);
}

TEST(TimeTicks, PicksClockSteps) {
  EXPECT_DOUBLE_EQ(TimeTicks(0, 5 * 3600, 6).step, 3600.0);  // raw 3000 s -> 1 h
  EXPECT_DOUBLE_EQ(TimeTicks(0, 600, 6).step, 120.0);         // raw 100 s -> 2 min
  EXPECT_EQ(FormatTimeTick(7200, 3600), "2:00");
  EXPECT_EQ(FormatTimeTick(150, 60), "2:30");
  EXPECT_EQ(FormatTimeTick(20, 5), "20 s");
  EXPECT_EQ(FormatValueTick(3.2, 0.2), "3.2");
  EXPECT_EQ(FormatValueTick(3.25, 0.05), "3.25");
  EXPECT_EQ(FormatValueTick(500, 100), "500");
}

// Reads a tick label back in the style its axis title names.
double ParseTimeLabel(const std::string& label, TimeStyle style) {
  double sign = 1.0;
  std::string s = label;
  if (!s.empty() && s[0] == '-') {
    sign = -1.0;
    s = s.substr(1);
  }
  int d = 0, h = 0, m = 0, sec = 0;
  switch (style) {
    case TimeStyle::kSeconds: return sign * std::stod(s);
    case TimeStyle::kDays: return sign * std::stod(s) * 86400.0;
    case TimeStyle::kMinSec:
      EXPECT_EQ(std::sscanf(s.c_str(), "%d:%2d", &m, &sec), 2) << label;
      EXPECT_LT(sec, 60) << label;
      return sign * (m * 60.0 + sec);
    case TimeStyle::kHourMinSec:
      EXPECT_EQ(std::sscanf(s.c_str(), "%d:%2d:%2d", &h, &m, &sec), 3) << label;
      EXPECT_LT(m, 60) << label;
      return sign * (h * 3600.0 + m * 60.0 + sec);
    case TimeStyle::kHourMin:
      EXPECT_EQ(std::sscanf(s.c_str(), "%d:%2d", &h, &m), 2) << label;
      EXPECT_LT(m, 60) << label;
      return sign * (h * 3600.0 + m * 60.0);
    case TimeStyle::kDayHourMin:
      EXPECT_EQ(std::sscanf(s.c_str(), "%dd %2d:%2d", &d, &h, &m), 3) << label;
      EXPECT_LT(h, 24) << label;
      return sign * (d * 86400.0 + h * 3600.0 + m * 60.0);
  }
  return 0.0;
}

// At every zoom, from a 3 s window to a three-week run and at offsets inside a
// long run, every tick label read back in its axis's style is the tick's own
// value, and the labels of one axis all differ: "2:00" on a 9-minute run means
// two minutes and says so in the title (m:ss), never h:mm.
TEST(TimeAxis, LabelsMatchTheirTicksAtEveryZoom) {
  const double spans[] = {3, 8, 45, 90, 540, 1500, 3000, 5400, 4 * 3600, 9 * 3600, 30 * 3600, 3 * 86400, 21 * 86400};
  const double offsets[] = {0, 37, 3500, 7 * 3600 + 125, 2 * 86400 + 3 * 3600};
  for (double span : spans)
    for (double lo : offsets)
      for (int target : {3, 6, 10}) {
        TimeAxis a = MakeTimeAxis(lo, lo + span, target);
        ASSERT_FALSE(a.ticks.values.empty()) << span;
        std::set<std::string> seen;
        for (double v : a.ticks.values) {
          std::string label = FormatTime(v, a.style, a.ticks.step);
          EXPECT_NEAR(ParseTimeLabel(label, a.style), v, a.style == TimeStyle::kSeconds ? a.ticks.step * 1e-3 : 0.5)
              << "span " << span << " from " << lo << ": " << label << " (" << TimeStyleUnit(a.style) << ")";
          EXPECT_TRUE(seen.insert(label).second) << "repeated label " << label << " span " << span << " from " << lo;
        }
      }
}

TEST(TimeAxis, StyleFollowsTheAxis) {
  // A 9-minute run: 2-minute ticks written m:ss.
  TimeAxis nine = MakeTimeAxis(0, 540, 5);
  EXPECT_EQ(nine.style, TimeStyle::kMinSec);
  EXPECT_STREQ(TimeStyleUnit(nine.style), "m:ss");
  EXPECT_EQ(FormatTime(240, nine.style, nine.ticks.step), "4:00");
  // Seven hours: hour ticks written h:mm.
  TimeAxis seven = MakeTimeAxis(0, 7 * 3600, 7);
  EXPECT_EQ(seven.style, TimeStyle::kHourMin);
  EXPECT_EQ(FormatTime(7200, seven.style, seven.ticks.step), "2:00");
  // Zoomed to half a minute two hours in: seconds matter, h:mm:ss.
  TimeAxis zoom = MakeTimeAxis(7200, 7230, 6);
  EXPECT_EQ(zoom.style, TimeStyle::kHourMinSec);
  EXPECT_EQ(FormatTime(7215, zoom.style, zoom.ticks.step), "2:00:15");
  // Past a day: days and the time of day.
  TimeAxis days = MakeTimeAxis(0, 40 * 3600, 6);
  EXPECT_EQ(days.style, TimeStyle::kDayHourMin);
  EXPECT_EQ(FormatTime(30 * 3600, days.style, days.ticks.step), "1d 06:00");
  // Weeks: whole days.
  TimeAxis weeks = MakeTimeAxis(0, 20 * 86400, 5);
  EXPECT_EQ(weeks.style, TimeStyle::kDays);
  EXPECT_EQ(FormatTime(7 * 86400, weeks.style, weeks.ticks.step), "7");
  // A short window: plain seconds with the decimals the step needs.
  TimeAxis secs = MakeTimeAxis(10, 12, 4);
  EXPECT_EQ(secs.style, TimeStyle::kSeconds);
  EXPECT_EQ(FormatTime(10.5, secs.style, secs.ticks.step), "10.5");
}

TEST(AxisMap, RoundTripsAndFlips) {
  AxisMap y{{2.5, 4.5}, 500.0, 100.0};  // drawn downwards
  EXPECT_DOUBLE_EQ(y.ToPixel(2.5), 500.0);
  EXPECT_DOUBLE_EQ(y.ToPixel(4.5), 100.0);
  EXPECT_DOUBLE_EQ(y.ToPixel(3.5), 300.0);
  EXPECT_NEAR(y.ToValue(y.ToPixel(3.1234)), 3.1234, 1e-12);
}

TEST(PadRange, WidensFlatData) {
  Range r;
  r.Include(3.0);
  Range p = PadRange(r, 0.0, 0.1);
  EXPECT_NEAR(p.lo, 2.9, 1e-12);
  EXPECT_NEAR(p.hi, 3.1, 1e-12);
}

// Brute force is the reference for the pyramid.
void ExpectQueriesMatch(const std::vector<float>& v, const MinMaxPyramid& p, std::mt19937& rng) {
  std::uniform_int_distribution<size_t> pick(0, v.size());
  for (int k = 0; k < 300; ++k) {
    size_t a = pick(rng), b = pick(rng);
    if (a > b) std::swap(a, b);
    float mn = 0, mx = 0;
    bool ok = p.Query(a, b, &mn, &mx);
    ASSERT_EQ(ok, a < b);
    if (!ok) continue;
    auto [lo, hi] = std::minmax_element(v.begin() + static_cast<ptrdiff_t>(a), v.begin() + static_cast<ptrdiff_t>(b));
    ASSERT_EQ(mn, *lo) << a << ".." << b;
    ASSERT_EQ(mx, *hi) << a << ".." << b;
  }
}

TEST(MinMaxPyramid, MatchesBruteForceWhileGrowingInPieces) {
  unsigned seed = 20261201;
  std::mt19937 rng(seed);
  SCOPED_TRACE(::testing::Message() << "seed " << seed);
  std::normal_distribution<float> noise(0.0f, 1.0f);
  std::uniform_int_distribution<int> chunk(1, 700);
  std::vector<float> all;
  MinMaxPyramid p;
  while (all.size() < 20000) {
    std::vector<float> add(static_cast<size_t>(chunk(rng)));
    for (float& x : add) x = noise(rng);
    all.insert(all.end(), add.begin(), add.end());
    p.Append(add.data(), add.size());
    ASSERT_EQ(p.size(), all.size());
    ExpectQueriesMatch(all, p, rng);
  }
}

TEST(ReduceColumns, ColumnsHoldTheirSamplesExtremes) {
  // 10,000 samples at 1 s; a spike at t = 5000 must survive reduction to 100 columns.
  std::vector<double> xs;
  std::vector<float> vs;
  for (int i = 0; i < 10000; ++i) {
    xs.push_back(i);
    vs.push_back(i == 5000 ? 9.0f : 3.0f);
  }
  MinMaxPyramid p;
  p.Append(vs.data(), vs.size());
  auto cols = ReduceColumns(xs, p, 0.0, 10000.0, 100);
  ASSERT_EQ(cols.size(), 100u);
  for (size_t c = 0; c < cols.size(); ++c) {
    ASSERT_TRUE(cols[c].has_data);
    float expect_max = (c == 50) ? 9.0f : 3.0f;
    // Column 51 is joined to column 50's band (its min reaches 3, max stays 3).
    EXPECT_EQ(cols[c].max, expect_max) << c;
    EXPECT_EQ(cols[c].min, 3.0f) << c;
  }
  // A window outside the data has no columns with data.
  auto none = ReduceColumns(xs, p, 20000.0, 30000.0, 10);
  for (const Column& c : none) EXPECT_FALSE(c.has_data);
}

TEST(ReduceColumns, JoinsSteps) {
  std::vector<double> xs = {0, 1, 2, 3};
  std::vector<float> vs = {1, 1, 5, 5};
  MinMaxPyramid p;
  p.Append(vs.data(), vs.size());
  auto cols = ReduceColumns(xs, p, 0.0, 4.0, 4);
  EXPECT_EQ(cols[2].min, 1.0f);  // reaches down to the previous column
  EXPECT_EQ(cols[2].max, 5.0f);
  EXPECT_EQ(cols[3].min, 5.0f);
}

// A rest logged on change: samples minutes apart. Every pixel column between
// them carries the straight line joining them, so the trace is drawn whole,
// not as dots; only a gap event (readings really missing) leaves columns empty.
TEST(ReduceColumns, JoinsSparseSamplesAndStopsOnlyAtGaps) {
  std::vector<double> xs = {0, 600, 1200, 1800};
  std::vector<float> vs = {4.0f, 3.9f, 3.9f, 3.6f};
  MinMaxPyramid p;
  p.Append(vs.data(), vs.size());
  auto cols = ReduceColumns(xs, p, 0.0, 1800.0, 90);
  int bridged = 0;
  for (const Column& c : cols) {
    EXPECT_TRUE(c.has_data);
    bridged += c.bridged ? 1 : 0;
  }
  EXPECT_GT(bridged, 80);
  // Column 15 (x 300..320, middle 310) lies on the line from 4.0 V to 3.9 V.
  EXPECT_NEAR(cols[15].min, 4.0 - 0.1 * 310.0 / 600.0, 1e-4);

  std::vector<double> gap = {1500.0};  // readings missing between 1200 s and 1800 s
  auto cut = ReduceColumns(xs, p, 0.0, 1800.0, 90, &gap);
  EXPECT_TRUE(cut[45].bridged);    // 900..920 s: no gap between 600 s and 1200 s, joined
  EXPECT_FALSE(cut[70].has_data);  // 1400..1420 s: inside the gap
  EXPECT_FALSE(cut[88].has_data);
  EXPECT_TRUE(cut[89].has_data);   // the column holding the 1800 s sample
}

TEST(BreakBetween, HalfOpenInterval) {
  std::vector<double> b = {10.0, 50.0};
  EXPECT_TRUE(BreakBetween(&b, 5.0, 10.0));
  EXPECT_FALSE(BreakBetween(&b, 10.0, 20.0));  // a gap ends at its event: (a, b]
  EXPECT_TRUE(BreakBetween(&b, 20.0, 60.0));
  EXPECT_FALSE(BreakBetween(&b, 11.0, 49.0));
  EXPECT_FALSE(BreakBetween(nullptr, 0.0, 100.0));
}

TEST(VisibleIndices, WidensByOne) {
  std::vector<double> xs = {0, 10, 20, 30, 40};
  IndexRange r = VisibleIndices(xs, 15, 25);
  EXPECT_EQ(r.first, 1u);
  EXPECT_EQ(r.last, 4u);
  EXPECT_EQ(NearestIndex(xs, 14), 1u);
  EXPECT_EQ(NearestIndex(xs, 16), 2u);
  EXPECT_EQ(NearestIndex(xs, 99), 4u);
}

}  // namespace
}  // namespace kp::ui

namespace kp::ui {
namespace {

// Bands (a block summary's min and max) and a tail replaced as it grows, as
// the panel's overview uses them, against brute force.
TEST(MinMaxPyramid, BandsAndReplacedTailMatchBruteForce) {
  std::mt19937 rng(7);
  std::uniform_real_distribution<float> u(-5.0f, 5.0f);
  std::vector<float> lo, hi;
  MinMaxPyramid p;
  for (int round = 0; round < 300; ++round) {
    // Replace the last element now and then, append 1..20 otherwise.
    if (!lo.empty() && round % 3 == 0) {
      lo.pop_back();
      hi.pop_back();
      p.Truncate(lo.size());
    }
    int add = 1 + round % 20;
    std::vector<float> a, b;
    for (int k = 0; k < add; ++k) {
      float x = u(rng), y = u(rng);
      a.push_back(std::min(x, y));
      b.push_back(std::max(x, y));
    }
    p.AppendBands(a.data(), b.data(), a.size());
    lo.insert(lo.end(), a.begin(), a.end());
    hi.insert(hi.end(), b.begin(), b.end());
    ASSERT_EQ(p.size(), lo.size());
    for (int q = 0; q < 20; ++q) {
      size_t i = rng() % lo.size(), j = i + 1 + rng() % (lo.size() - i);
      float mn = 1e9f, mx = -1e9f;
      for (size_t k = i; k < j; ++k) {
        mn = std::min(mn, lo[k]);
        mx = std::max(mx, hi[k]);
      }
      float qmn = 0, qmx = 0;
      ASSERT_TRUE(p.Query(i, j, &qmn, &qmx));
      ASSERT_EQ(qmn, mn) << round << " [" << i << "," << j << ")";
      ASSERT_EQ(qmx, mx) << round << " [" << i << "," << j << ")";
    }
  }
  p.Truncate(0);
  EXPECT_EQ(p.size(), 0u);
  float a = 0, b = 0;
  EXPECT_FALSE(p.Query(0, 1, &a, &b));
}

}  // namespace
}  // namespace kp::ui
