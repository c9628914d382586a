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
// 1/2/3/6/12 h, then days.
Ticks TimeTicks(double lo_s, double hi_s, int target);
// "2:30:00" / "45:10" / "12.5 s" style label for a time tick, given the step.
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
};

// Reduces a series with ascending x (`xs`) and values held in `pyramid` to
// `width` pixel columns covering [x_lo, x_hi). Neighbouring columns are made
// to overlap so the band reads as one connected trace.
std::vector<Column> ReduceColumns(const std::vector<double>& xs, const MinMaxPyramid& pyramid, double x_lo, double x_hi,
                                  int width);

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
