#include "ui/panel/plot_math.h"

#include <algorithm>
#include <cmath>

#include <fmt/format.h>

namespace kp::ui {

Range PadRange(Range r, double margin_fraction, double min_half_span) {
  if (r.Empty()) return {0.0, 1.0};
  if (r.Span() < 2.0 * min_half_span) {
    double mid = 0.5 * (r.lo + r.hi);
    r = {mid - min_half_span, mid + min_half_span};
  }
  double pad = r.Span() * margin_fraction;
  return {r.lo - pad, r.hi + pad};
}

namespace {

Ticks TicksWithStep(double lo, double hi, double step) {
  Ticks t;
  t.step = step;
  if (!(step > 0.0) || !(hi >= lo)) return t;
  double first = std::ceil(lo / step - 1e-9) * step;
  for (int i = 0; i < 1000; ++i) {
    double v = first + i * step;
    if (v > hi + step * 1e-9) break;
    if (std::fabs(v) < step * 1e-9) v = 0.0;  // no "-0"
    t.values.push_back(v);
  }
  return t;
}

}  // namespace

Ticks NiceTicks(double lo, double hi, int target) {
  if (!(hi > lo) || target < 1) return {};
  double raw = (hi - lo) / target;
  double mag = std::pow(10.0, std::floor(std::log10(raw)));
  double norm = raw / mag;
  double nice = norm < 1.5 ? 1.0 : norm < 3.5 ? 2.0 : norm < 7.5 ? 5.0 : 10.0;
  return TicksWithStep(lo, hi, nice * mag);
}

Ticks TimeTicks(double lo_s, double hi_s, int target) {
  if (!(hi_s > lo_s) || target < 1) return {};
  static constexpr double kSteps[] = {1,    2,    5,    10,    15,    30,    60,    120,   300,   600,
                                      900,  1800, 3600, 7200,  10800, 21600, 43200, 86400, 172800, 604800};
  // Sub-second steps only while a second would be too coarse; past a minute
  // the smallest step is a whole second, so clock labels stay exact.
  double raw = (hi_s - lo_s) / target;
  if (raw < 1.0) return NiceTicks(lo_s, hi_s, target);
  for (double s : kSteps)
    if (s >= raw * 0.75) return TicksWithStep(lo_s, hi_s, s);
  return TicksWithStep(lo_s, hi_s, std::ceil(raw / 604800.0) * 604800.0);
}

TimeStyle ChooseTimeStyle(double step_s, double max_abs_s) {
  if (step_s < 1.0 || max_abs_s < 60.0) return TimeStyle::kSeconds;
  const bool whole_minutes = std::fmod(step_s, 60.0) == 0.0;
  if (max_abs_s < 3600.0) return TimeStyle::kMinSec;
  if (!whole_minutes) return TimeStyle::kHourMinSec;
  if (step_s >= 86400.0 && std::fmod(step_s, 86400.0) == 0.0) return TimeStyle::kDays;
  if (max_abs_s < 86400.0) return TimeStyle::kHourMin;
  return TimeStyle::kDayHourMin;
}

const char* TimeStyleUnit(TimeStyle style) {
  switch (style) {
    case TimeStyle::kSeconds: return "s";
    case TimeStyle::kMinSec: return "m:ss";
    case TimeStyle::kHourMinSec: return "h:mm:ss";
    case TimeStyle::kHourMin: return "h:mm";
    case TimeStyle::kDayHourMin: return "d hh:mm";
    case TimeStyle::kDays: return "days";
  }
  return "s";
}

std::string FormatTime(double t_s, TimeStyle style, double step_s) {
  const std::string sign = t_s < 0 ? "-" : "";
  const double a = std::fabs(t_s);
  if (style == TimeStyle::kSeconds) {
    int decimals = step_s >= 1.0 ? 0 : std::min(6, static_cast<int>(std::ceil(-std::log10(step_s) - 1e-9)));
    return fmt::format("{}{:.{}f}", sign, a, decimals);
  }
  if (style == TimeStyle::kDays) return sign + FormatValueTick(a / 86400.0, step_s / 86400.0);
  const long long total = std::llround(a);
  const long long d = total / 86400, h = total / 3600, m = (total / 60) % 60, s = total % 60;
  switch (style) {
    case TimeStyle::kMinSec: return fmt::format("{}{}:{:02}", sign, total / 60, s);
    case TimeStyle::kHourMinSec: return fmt::format("{}{}:{:02}:{:02}", sign, h, m, s);
    case TimeStyle::kHourMin: return fmt::format("{}{}:{:02}", sign, h, m);
    case TimeStyle::kDayHourMin: return fmt::format("{}{}d {:02}:{:02}", sign, d, h % 24, m);
    default: break;
  }
  return fmt::format("{}{}", sign, total);
}

TimeAxis MakeTimeAxis(double lo_s, double hi_s, int target) {
  TimeAxis a;
  a.ticks = TimeTicks(lo_s, hi_s, target);
  a.style = ChooseTimeStyle(a.ticks.step, std::max(std::fabs(lo_s), std::fabs(hi_s)));
  return a;
}

std::string FormatTimeTick(double t_s, double step_s) {
  TimeStyle style = ChooseTimeStyle(step_s, std::fabs(t_s));
  if (style == TimeStyle::kSeconds) return FormatTime(t_s, style, step_s) + " s";
  if (style == TimeStyle::kDays) return FormatTime(t_s, style, step_s) + " d";
  return FormatTime(t_s, style, step_s);
}

std::string FormatValueTick(double v, double step) {
  int decimals = step >= 1.0 ? 0 : std::min(6, static_cast<int>(std::ceil(-std::log10(step) - 1e-9)));
  return fmt::format("{:.{}f}", v, decimals);
}

double AxisMap::ToPixel(double v) const {
  double span = value.Span();
  if (!(span > 0.0)) return 0.5 * (pixel_lo + pixel_hi);
  return pixel_lo + (v - value.lo) / span * (pixel_hi - pixel_lo);
}

double AxisMap::ToValue(double px) const {
  double span = pixel_hi - pixel_lo;
  if (span == 0.0) return value.lo;
  return value.lo + (px - pixel_lo) / span * value.Span();
}

void MinMaxPyramid::Clear() {
  base_min_.clear();
  base_max_.clear();
  levels_.clear();
}

void MinMaxPyramid::Truncate(size_t n) {
  if (n >= size()) return;
  base_min_.resize(n);
  base_max_.resize(n);
  Rebuild(n);
}

void MinMaxPyramid::Append(const float* values, size_t count) { AppendBands(values, values, count); }

void MinMaxPyramid::AppendBands(const float* mins, const float* maxs, size_t count) {
  if (count == 0) return;
  size_t dirty_from = base_min_.size();
  base_min_.insert(base_min_.end(), mins, mins + count);
  base_max_.insert(base_max_.end(), maxs, maxs + count);
  Rebuild(dirty_from);
}

void MinMaxPyramid::Rebuild(size_t dirty_from) {
  // Recompute upwards only from the block that holds the first changed element.
  size_t l = 0;
  for (;; ++l) {
    size_t n_below = l == 0 ? base_min_.size() : levels_[l - 1].min.size();
    if (n_below <= 1) break;
    size_t n = (n_below + kFanout - 1) / kFanout;
    if (levels_.size() <= l) levels_.emplace_back();
    Level& lv = levels_[l];
    const float* bmin = l == 0 ? base_min_.data() : levels_[l - 1].min.data();
    const float* bmax = l == 0 ? base_max_.data() : levels_[l - 1].max.data();
    lv.min.resize(n);
    lv.max.resize(n);
    size_t first_block = dirty_from / kFanout;
    for (size_t b = first_block; b < n; ++b) {
      size_t i0 = b * kFanout, i1 = std::min(n_below, i0 + kFanout);
      float mn = bmin[i0], mx = bmax[i0];
      for (size_t i = i0 + 1; i < i1; ++i) {
        mn = std::min(mn, bmin[i]);
        mx = std::max(mx, bmax[i]);
      }
      lv.min[b] = mn;
      lv.max[b] = mx;
    }
    dirty_from = first_block;
    if (n == 1) {
      ++l;
      break;
    }
  }
  levels_.resize(l);
}

size_t MinMaxPyramid::Bytes() const {
  size_t b = (base_min_.capacity() + base_max_.capacity()) * sizeof(float);
  for (const Level& lv : levels_) b += (lv.min.capacity() + lv.max.capacity()) * sizeof(float);
  return b;
}

bool MinMaxPyramid::Query(size_t begin, size_t end, float* min_out, float* max_out) const {
  end = std::min(end, size());
  if (begin >= end) return false;
  float mn = base_min_[begin], mx = base_max_[begin];
  size_t lo = begin, hi = end;  // half-open range at the current level
  // Level -1 is the base, level l >= 0 is levels_[l].
  for (size_t depth = 0; lo < hi; ++depth) {
    const float* vmin = depth == 0 ? base_min_.data() : levels_[depth - 1].min.data();
    const float* vmax = depth == 0 ? base_max_.data() : levels_[depth - 1].max.data();
    bool top = depth == levels_.size();
    if (top) {
      for (size_t i = lo; i < hi; ++i) {
        mn = std::min(mn, vmin[i]);
        mx = std::max(mx, vmax[i]);
      }
      break;
    }
    // Peel unaligned elements at both ends, then move one level up.
    while (lo < hi && lo % kFanout != 0) {
      mn = std::min(mn, vmin[lo]);
      mx = std::max(mx, vmax[lo]);
      ++lo;
    }
    while (lo < hi && hi % kFanout != 0) {
      --hi;
      mn = std::min(mn, vmin[hi]);
      mx = std::max(mx, vmax[hi]);
    }
    lo /= kFanout;
    hi /= kFanout;
  }
  *min_out = mn;
  *max_out = mx;
  return true;
}

bool BreakBetween(const std::vector<double>* breaks, double a, double b) {
  if (breaks == nullptr || breaks->empty() || !(b > a)) return false;
  auto it = std::upper_bound(breaks->begin(), breaks->end(), a);  // first break > a
  return it != breaks->end() && *it <= b;
}

std::vector<Column> ReduceColumns(const std::vector<double>& xs, const MinMaxPyramid& pyramid, double x_lo, double x_hi,
                                  int width, const std::vector<double>* breaks) {
  std::vector<Column> cols(static_cast<size_t>(std::max(width, 0)));
  size_t n = std::min(xs.size(), pyramid.size());
  if (width <= 0 || n == 0 || !(x_hi > x_lo)) return cols;
  double dx = (x_hi - x_lo) / width;
  auto begin_it = xs.begin(), end_it = xs.begin() + static_cast<ptrdiff_t>(n);
  size_t i = static_cast<size_t>(std::lower_bound(begin_it, end_it, x_lo) - begin_it);
  for (int c = 0; c < width && i < n; ++c) {
    double col_hi = x_lo + (c + 1) * dx;
    size_t j = static_cast<size_t>(std::lower_bound(begin_it + static_cast<ptrdiff_t>(i), end_it, col_hi) - begin_it);
    if (c == width - 1) j = static_cast<size_t>(std::upper_bound(begin_it + static_cast<ptrdiff_t>(i), end_it, x_hi) - begin_it);
    Column& col = cols[static_cast<size_t>(c)];
    col.has_data = pyramid.Query(i, j, &col.min, &col.max);
    if (!col.has_data && i > 0 && i < n && !BreakBetween(breaks, xs[i - 1], xs[i])) {
      // Between two samples: the line joining them, at the column's middle.
      const double xm = x_lo + (c + 0.5) * dx, x0 = xs[i - 1], x1 = xs[i];
      const double f = x1 > x0 ? std::clamp((xm - x0) / (x1 - x0), 0.0, 1.0) : 0.0;
      col.min = col.max = static_cast<float>(pyramid.At(i - 1) + f * (pyramid.At(i) - pyramid.At(i - 1)));
      col.has_data = true;
      col.bridged = true;
    }
    i = j;
  }
  // Join neighbours: a column's band reaches the previous column's band.
  const Column* prev = nullptr;
  for (Column& col : cols) {
    if (!col.has_data) {
      prev = nullptr;  // a break: the next column starts afresh
      continue;
    }
    if (prev) {
      if (col.min > prev->max) col.min = prev->max;
      if (col.max < prev->min) col.max = prev->min;
    }
    prev = &col;
  }
  return cols;
}

IndexRange VisibleIndices(const std::vector<double>& xs, double lo, double hi) {
  IndexRange r;
  if (xs.empty() || hi < lo) return r;
  size_t a = static_cast<size_t>(std::lower_bound(xs.begin(), xs.end(), lo) - xs.begin());
  size_t b = static_cast<size_t>(std::upper_bound(xs.begin(), xs.end(), hi) - xs.begin());
  if (b < a) b = a;  // xs not ascending after all (e.g. charge that went back): never an inverted range
  r.first = a > 0 ? a - 1 : 0;
  r.last = std::min(xs.size(), b + 1);
  return r;
}

size_t NearestIndex(const std::vector<double>& xs, double x) {
  size_t i = static_cast<size_t>(std::lower_bound(xs.begin(), xs.end(), x) - xs.begin());
  if (i >= xs.size()) return xs.size() - 1;
  if (i > 0 && x - xs[i - 1] < xs[i] - x) return i - 1;
  return i;
}

}  // namespace kp::ui
