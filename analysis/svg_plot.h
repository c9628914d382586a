// Inline SVG line plots as plain strings (no I/O): labelled axes with units,
// a legend, optional right-hand axis. The output is well-formed XML so it can
// sit inside an XHTML page.
#pragma once

#include <cstddef>
#include <span>
#include <string>
#include <string_view>
#include <vector>

namespace kp {

struct PlotSeries {
  std::string name;
  std::vector<double> x, y;
  bool right_axis = false;  // scaled against the right-hand axis
  bool markers = false;     // dots instead of a line (sparse points such as R vs DoD)
};

struct PlotSpec {
  std::string id;  // element id, unique in the page ("plot-voltage-time")
  std::string title;
  std::string x_label;   // with unit: "time (h)"
  std::string y_label;   // with unit: "voltage (V)"
  std::string y2_label;  // right axis, when a series uses it
  std::vector<PlotSeries> series;
};

// Renders the plot; series longer than max_points are reduced by keeping each
// bucket's minimum and maximum (so voltage sags stay visible).
std::string RenderSvgPlot(const PlotSpec& spec, int width = 760, int height = 320, size_t max_points = 1500);

// Indices of the points kept by the min/max reduction (always the first and last).
std::vector<size_t> ReducePoints(std::span<const double> y, size_t max_points);

// &, <, >, " and ' escaped for XML text and attribute values.
std::string XmlEscape(std::string_view text);

// Round tick values covering [lo, hi] (about `target` of them).
std::vector<double> NiceTicks(double lo, double hi, int target = 6);

}  // namespace kp
