// The panel's plot, drawn on ImDrawList: frame, grid, ticks and labels on two
// y axes, legend, horizontal limit lines, min/max-per-column traces (a raw
// polyline only when fewer points than pixels are visible), mouse pan/zoom
// and a cursor read-out. Holds no data: traces borrow the caller's arrays for
// the duration of the call. UI thread only.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include <imgui.h>

#include "ui/panel/plot_math.h"
#include "ui/panel/theme.h"

namespace kp::ui {

struct Trace {
  const std::vector<double>* xs = nullptr;  // ascending
  const MinMaxPyramid* ys = nullptr;        // same length as xs
  ImU32 colour = 0;
  std::string name;  // legend
  std::string unit;  // read-out
  int axis = 0;      // 0 left, 1 right
  // Bands (one element per stored block summary): each element spans
  // [xs[i], xs_end[i]] and its min..max; drawn as boxes when few are visible.
  const std::vector<double>* xs_end = nullptr;
  // The newest value for the legend (default: the last element's).
  std::optional<double> latest;
  // Times where readings were really missing ("gap" events, ascending): the
  // trace stops across them and nowhere else (sparse logging is joined up).
  const std::vector<double>* breaks = nullptr;
  // Legend text after the name instead of the latest value (e.g. "load off").
  std::string legend_note;
};

struct HLine {
  double value = 0.0;
  ImU32 colour = 0;
  std::string label;
  int axis = 0;
  bool dashed = false;
  bool fit = true;  // widen the axis so the line is on screen
};

// The x view shared by plots drawn one above the other.
struct XView {
  bool follow = true;  // keep the newest data in view
  double span = 0.0;   // width of the followed window; 0 = the whole run
  Range range;         // when not following
};

struct PlotSpec {
  std::vector<Trace> traces;
  std::vector<HLine> lines;
  Range data_x;  // full extent of the data on x
  bool time_x = true;
  bool integer_x = false;  // a count (cycle number): ticks at whole numbers only
  bool markers = false;    // a dot at every point drawn as a line
  bool legend_values = true;  // the latest value after each name
  float legend_room = 0.0f;  // left axis: this fraction of its span added on top, so the legend covers no data
  std::string x_label;  // on a time axis, followed by the label style: "time (m:ss)"
  std::string y_label[2];
  float min_y_span[2] = {0.05f, 0.5f};  // smallest half-span per axis
};

struct PlotResult {
  ImVec2 rect_min, rect_max;  // the data area in screen pixels
  Range x;
  Range y[2];
  bool hovered = false;
  // The x ticks drawn, their labels (those inside the frame) and the axis title.
  std::vector<double> x_ticks;
  std::vector<std::string> x_labels;
  TimeStyle x_style = TimeStyle::kSeconds;
  std::string x_title;
  ImVec2 legend_max;  // bottom-right corner of the legend (top-left corner: rect_min)
};

// Draws at the cursor position with `size` (a non-positive component takes the
// remaining space). `id` must be unique in the window.
PlotResult DrawPlot(const char* id, const PlotSpec& spec, XView& view, ImVec2 size, const Theme& theme);

// The x range a view shows for data spanning `data_x`.
Range ResolveX(const XView& view, Range data_x);

}  // namespace kp::ui
