// Inline SVG line plots as plain strings (no I/O): labelled axes with units,
// a legend, optional right-hand axis. The output is well-formed XML so it can
// sit inside an XHTML page.
#pragma once

#include <cstddef>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "analysis/duration_format.h"

namespace kp {

struct PlotSeries {
  std::string name;
  std::vector<double> x, y;
  bool right_axis = false;  // scaled against the right-hand axis
  bool markers = false;     // dots instead of a line (sparse points such as R vs DoD)
  bool thin = false;        // a hairline (the envelopes of a pulse train)
};

// A horizontal reference level (cutoff voltage, temperature limit), drawn as a
// dashed line across the frame with its label at the right end; it widens the
// axis range so it is always in view.
struct PlotLevel {
  double value = 0;
  std::string label;  // "cutoff 2.75 V"
  bool right_axis = false;
};

// A vertical mark at one x (the abort point), labelled at the top.
struct PlotMark {
  double x = 0;
  std::string label;
};

enum class PlotAxis {
  kNumber,    // plain numbers
  kDuration,  // x in seconds, ticks at round times, labelled m:ss, h:mm or d+h:mm by the tick step
};

struct PlotSpec {
  std::string id;  // element id, unique in the page ("plot-voltage-time")
  std::string title;
  std::string x_label;   // with unit: "time (h)"
  std::string y_label;   // with unit: "voltage (V)"
  std::string y2_label;  // right axis, when a series uses it
  std::vector<PlotSeries> series;
  std::vector<PlotLevel> levels;
  std::vector<PlotMark> marks;
  PlotAxis x_axis = PlotAxis::kNumber;  // kDuration: x_label gets the tick format appended ("time (h:mm)")
  int height = 0;                       // drawing height in viewBox units; 0 = the renderer's default
};

// Renders the plot; series longer than max_points are reduced by keeping each
// bucket's minimum and maximum (so voltage sags stay visible). `width` and
// `height` are the viewBox; the element itself scales to the width of the page
// (class "plot", width 100 %), so the plot is as wide as the text on any screen
// or paper.
std::string RenderSvgPlot(const PlotSpec& spec, int width = 960, int height = 340, size_t max_points = 1800);


// Indices of the points kept by the min/max reduction (always the first and last).
std::vector<size_t> ReducePoints(std::span<const double> y, size_t max_points);

// &, <, >, " and ' escaped for XML text and attribute values.
std::string XmlEscape(std::string_view text);

// Round tick values covering [lo, hi] (about `target` of them).
std::vector<double> NiceTicks(double lo, double hi, int target = 6);

}  // namespace kp
