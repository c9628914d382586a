// Plot arithmetic for the panel, free of any window or GPU: axis ticks, the
// data-to-pixel mapping and the min/max-per-pixel-column reduction that keeps
// millions of samples cheap to draw. Unit-tested in tests/ui.
#pragma once

#include <cstddef>
#include <string>
#include <vector>

namespace kp::ui {

// A closed value interval; empty when hi < lo.
struct Range {
  double lo = 0.0;
  double hi = -1.0;
  bool Empty() const { return hi < lo; }
  double Span() const { return hi - lo; }
  void Include(double v) {
    if (Empty()) {
      lo = hi = v;
    } else {
      if (v < lo) lo = v;
      if (v > hi) hi = v;
    }
  }
};

// Widens a data range so it is drawable: a zero-width range gets ±`min_half_span`,
// and `margin_fraction` of the span is added on both sides.
Range PadRange(Range r, double margin_fraction, double min_half_span);

// Tick positions at 1, 2 or 5 × 10^k, about `target` of them inside [lo, hi].
struct Ticks {
  double step = 0.0;
  std::vector<double> values;
};
Ticks NiceTicks(double lo, double hi, int target);
// Same for a time axis in seconds: steps of 1/2/5/10/15/30 s, 1/2/5/10/15/30 min,
// 1/2/3/6/12 h, then 1/2/7 days and whole weeks.
Ticks TimeTicks(double lo_s, double hi_s, int target);
// How the labels of one time axis are written; every tick of an axis uses the
// same style, and the axis title names it, so "2:00" never means two minutes on
// one plot and two hours on the next.
enum class TimeStyle {
  kSeconds,      // "12.5"            (title "s")      sub-second steps or spans under a minute
  kMinSec,       // "8:30"            (title "m:ss")   second or minute steps, under an hour
  kHourMinSec,   // "1:08:30"         (title "h:mm:ss") second steps past the hour
  kHourMin,      // "6:30"            (title "h:mm")   minute or hour steps past the hour, under a day
  kDayHourMin,   // "1d 06:30"        (title "d hh:mm") minute or hour steps past a day
  kDays,         // "3"               (title "days")   steps of whole days
};
// The style for ticks `step_s` apart on an axis whose largest |value| is `max_abs_s`.
TimeStyle ChooseTimeStyle(double step_s, double max_abs_s);
// The axis title's unit for a style ("m:ss", "h:mm", "days"...).
const char* TimeStyleUnit(TimeStyle style);
// A tick label in `style`; `step_s` sets the decimals of kSeconds and kDays.
std::string FormatTime(double t_s, TimeStyle style, double step_s);
// Ticks of a time axis with their style.
struct TimeAxis {
  Ticks ticks;
  TimeStyle style = TimeStyle::kSeconds;
};
TimeAxis MakeTimeAxis(double lo_s, double hi_s, int target);
// "2:30:00" / "45:10" / "12.5 s" style label for a time tick, given the step
// (the style ChooseTimeStyle picks for that value alone; for read-outs).
std::string FormatTimeTick(double t_s, double step_s);
// A value label with as many decimals as the tick step needs.
std::string FormatValueTick(double v, double step);

// Linear map between a value range and a pixel span (pixel_lo may exceed
// pixel_hi, as for a y axis drawn downwards).
struct AxisMap {
  Range value;
  double pixel_lo = 0.0;
  double pixel_hi = 1.0;
  double ToPixel(double v) const;
  double ToValue(double px) const;
};

// Min/max over index ranges of an append-only series, answered in
// O(kFanout · levels) from a pyramid of block minima and maxima. Appending only
// recomputes the last block of every level (the new tail), never the whole series.
// An element is a value (raw samples: min = max) or a band (a stored block
// summary of many samples: its min and max).
class MinMaxPyramid {
 public:
  static constexpr size_t kFanout = 8;
  void Clear();
  void Append(const float* values, size_t count);
  void AppendBands(const float* mins, const float* maxs, size_t count);
  // Drops the elements from `n` on (to replace a tail that grew).
  void Truncate(size_t n);
  size_t size() const { return base_min_.size(); }
  // The value (the middle of a band).
  float At(size_t i) const { return 0.5f * (base_min_[i] + base_max_[i]); }
  float MinAt(size_t i) const { return base_min_[i]; }
  float MaxAt(size_t i) const { return base_max_[i]; }
  // min/max over elements [begin, end); false when the range is empty.
  bool Query(size_t begin, size_t end, float* min_out, float* max_out) const;
  // Bytes held (capacity), for memory figures.
  size_t Bytes() const;

 private:
  struct Level {
    std::vector<float> min, max;
  };
  void Rebuild(size_t dirty_from);
  std::vector<float> base_min_, base_max_;  // the elements
  std::vector<Level> levels_;               // levels_[l] holds blocks of kFanout^(l+1) elements
};

// One pixel column of a reduced series.
struct Column {
  float min = 0.0f;
  float max = 0.0f;
  bool has_data = false;
  bool bridged = false;  // no sample in the column: the line between its neighbours
};

// Reduces a series with ascending x (`xs`) and values held in `pyramid` to
// `width` pixel columns covering [x_lo, x_hi). Neighbouring columns are made
// to overlap so the band reads as one connected trace. A column that falls
// between two samples (sparse logging: a rest logged only on change) gets the
// straight line between them, as a polyline would draw it, unless a break
// lies between the two: a time in `breaks` (ascending; the run's "gap"
// events, where readings were really missing) with x_before < b <= x_after.
// Only there does the trace stop.
std::vector<Column> ReduceColumns(const std::vector<double>& xs, const MinMaxPyramid& pyramid, double x_lo, double x_hi,
                                  int width, const std::vector<double>* breaks = nullptr);

// True when some time of `breaks` (ascending) lies in (a, b].
bool BreakBetween(const std::vector<double>* breaks, double a, double b);

// Index range [first, last) of `xs` (ascending) with x in [lo, hi], widened by
// one sample on each side so a line drawn from it reaches the edges.
struct IndexRange {
  size_t first = 0;
  size_t last = 0;
};
IndexRange VisibleIndices(const std::vector<double>& xs, double lo, double hi);

// Index of the sample whose x is nearest to `x` (xs non-empty, ascending).
size_t NearestIndex(const std::vector<double>& xs, double x);

}  // namespace kp::ui
