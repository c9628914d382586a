#include "ui/panel/plot_widget.h"

#include <algorithm>
#include <cmath>

#include <fmt/format.h>

namespace kp::ui {

Range ResolveX(const XView& view, Range data_x) {
  if (data_x.Empty()) return {0.0, 60.0};
  if (!view.follow) return view.range.Empty() || view.range.Span() <= 0.0 ? data_x : view.range;
  if (view.span > 0.0) return {data_x.hi - view.span * 0.97, data_x.hi + view.span * 0.03};
  double span = std::max(data_x.Span(), 1.0);
  return {data_x.lo, data_x.lo + span * 1.02};
}

namespace {

void DashedHLine(ImDrawList* dl, float x0, float x1, float y, ImU32 col, float thick, float dash) {
  for (float x = x0; x < x1; x += 2 * dash) dl->AddLine({x, y}, {std::min(x + dash, x1), y}, col, thick);
}

Range FitAxis(const PlotSpec& spec, int axis, Range x) {
  Range r;
  for (const Trace& t : spec.traces) {
    if (t.axis != axis || !t.xs || !t.ys || t.xs->empty()) continue;
    IndexRange ir = VisibleIndices(*t.xs, x.lo, x.hi);
    float mn, mx;
    if (t.ys->Query(ir.first, ir.last, &mn, &mx)) {
      r.Include(mn);
      r.Include(mx);
    }
  }
  for (const HLine& l : spec.lines)
    if (l.axis == axis && l.fit) r.Include(l.value);
  Range padded = PadRange(r, 0.06, spec.min_y_span[axis]);
  if (axis == 0) padded.hi += padded.Span() * spec.legend_room;
  return padded;
}

void DrawTrace(ImDrawList* dl, const Trace& t, const AxisMap& xm, const AxisMap& ym, float px0, int width, float thick,
               bool markers) {
  if (!t.xs || !t.ys || t.xs->empty()) return;
  IndexRange ir = VisibleIndices(*t.xs, xm.value.lo, xm.value.hi);
  size_t count = ir.last - ir.first;
  if (count == 0) return;
  if (count <= static_cast<size_t>(width) && t.xs_end != nullptr) {
    // Few bands: a box per block from its first sample time to the next
    // block's first (its last own sample when a gap event lies between).
    for (size_t i = ir.first; i < ir.last; ++i) {
      float x0 = static_cast<float>(xm.ToPixel((*t.xs)[i]));
      double end = (*t.xs_end)[i];
      if (i + 1 < t.xs->size() && !BreakBetween(t.breaks, end, (*t.xs)[i + 1])) end = (*t.xs)[i + 1];
      float x1 = std::max(x0 + 1.0f, static_cast<float>(xm.ToPixel(end)));
      float y_top = static_cast<float>(ym.ToPixel(t.ys->MaxAt(i))) - thick * 0.5f;
      float y_bot = static_cast<float>(ym.ToPixel(t.ys->MinAt(i))) + thick * 0.5f;
      dl->AddRectFilled({x0, y_top}, {x1, y_bot}, t.colour);
    }
    return;
  }
  if (count <= static_cast<size_t>(width)) {
    // Few points: a real polyline, in chunks that keep 16-bit indices safe.
    constexpr size_t kChunk = 2000;
    std::vector<ImVec2> pts;
    pts.reserve(std::min(count, kChunk + 1));
    auto flush = [&] {
      if (pts.size() == 1) dl->AddCircleFilled(pts[0], thick, t.colour);
      if (pts.size() > 1) dl->AddPolyline(pts.data(), static_cast<int>(pts.size()), t.colour, ImDrawFlags_None, thick);
      pts.clear();
    };
    if (markers)
      for (size_t i = ir.first; i < ir.last; ++i)
        dl->AddCircleFilled({static_cast<float>(xm.ToPixel((*t.xs)[i])), static_cast<float>(ym.ToPixel(t.ys->At(i)))}, thick * 1.8f,
                            t.colour);
    for (size_t i = ir.first; i < ir.last; ++i) {
      if (i > ir.first && BreakBetween(t.breaks, (*t.xs)[i - 1], (*t.xs)[i])) flush();  // readings were missing here
      pts.push_back({static_cast<float>(xm.ToPixel((*t.xs)[i])), static_cast<float>(ym.ToPixel(t.ys->At(i)))});
      if (pts.size() > kChunk) {
        dl->AddPolyline(pts.data(), static_cast<int>(pts.size()), t.colour, ImDrawFlags_None, thick);
        ImVec2 last = pts.back();
        pts.clear();
        pts.push_back(last);
      }
    }
    flush();
    return;
  }
  // Many points: one filled rectangle per pixel column, min to max.
  std::vector<Column> cols = ReduceColumns(*t.xs, *t.ys, xm.value.lo, xm.value.hi, width, t.breaks);
  float half = std::max(1.0f, thick * 0.5f);
  for (int c = 0; c < width; ++c) {
    const Column& col = cols[static_cast<size_t>(c)];
    if (!col.has_data) continue;
    float y_top = static_cast<float>(ym.ToPixel(col.max)) - half;
    float y_bot = static_cast<float>(ym.ToPixel(col.min)) + half;
    dl->AddRectFilled({px0 + c, y_top}, {px0 + c + 1.0f, y_bot}, t.colour);
  }
}

}  // namespace

PlotResult DrawPlot(const char* id, const PlotSpec& spec, XView& view, ImVec2 size, const Theme& theme) {
  PlotResult res;
  ImGuiStyle& style = ImGui::GetStyle();
  ImVec2 avail = ImGui::GetContentRegionAvail();
  if (size.x <= 0) size.x = avail.x;
  if (size.y <= 0) size.y = avail.y;
  size.x = std::max(size.x, 120.0f);
  size.y = std::max(size.y, 80.0f);
  ImVec2 outer0 = ImGui::GetCursorScreenPos();
  ImVec2 outer1 = {outer0.x + size.x, outer0.y + size.y};
  float fh = ImGui::GetFontSize();
  bool has_right = !spec.y_label[1].empty();
  float left_w = fh * 4.2f, right_w = fh * 3.2f;  // same margins on every plot keep stacked x axes aligned
  ImVec2 p0 = {std::floor(outer0.x + left_w), std::floor(outer0.y + fh * 0.6f)};
  ImVec2 p1 = {std::floor(outer1.x - right_w), std::floor(outer1.y - fh * 2.4f)};
  res.rect_min = p0;
  res.rect_max = p1;

  ImGui::InvisibleButton(id, size);
  bool hovered = ImGui::IsItemHovered();
  ImGuiIO& io = ImGui::GetIO();
  Range x = ResolveX(view, spec.data_x);
  int width = std::max(1, static_cast<int>(p1.x - p0.x));
  AxisMap xm{x, p0.x, p1.x};
  bool in_plot = hovered && io.MousePos.x >= p0.x && io.MousePos.x <= p1.x && io.MousePos.y >= p0.y && io.MousePos.y <= p1.y;

  // Mouse: wheel zooms about the pointer, drag pans, double-click fits all.
  if (in_plot && io.MouseWheel != 0.0f) {
    double at = xm.ToValue(io.MousePos.x);
    double k = std::pow(0.85, io.MouseWheel);
    view.follow = false;
    view.range = {at - (at - x.lo) * k, at + (x.hi - at) * k};
  }
  if (ImGui::IsItemActive() && ImGui::IsMouseDragging(ImGuiMouseButton_Left, 2.0f)) {
    double dv = io.MouseDelta.x / (p1.x - p0.x) * x.Span();
    view.follow = false;
    view.range = {x.lo - dv, x.hi - dv};
  }
  if (in_plot && ImGui::IsMouseDoubleClicked(ImGuiMouseButton_Left)) {
    view.follow = true;
    view.span = 0.0;
  }
  x = ResolveX(view, spec.data_x);
  xm.value = x;
  res.x = x;

  AxisMap ym[2];
  for (int a = 0; a < 2; ++a) {
    res.y[a] = FitAxis(spec, a, x);
    ym[a] = AxisMap{res.y[a], p1.y, p0.y};
  }

  ImDrawList* dl = ImGui::GetWindowDrawList();
  dl->AddRectFilled(p0, p1, theme.plot_bg);
  // Grid and ticks.
  // One label style for every tick of a time axis, named in the axis title.
  const int x_target = std::max(2, width / 100);
  TimeAxis ta = spec.time_x ? MakeTimeAxis(x.lo, x.hi, x_target) : TimeAxis{NiceTicks(x.lo, x.hi, x_target), TimeStyle::kSeconds};
  if (spec.integer_x && ta.ticks.step < 1.0) ta.ticks = NiceTicks(x.lo, x.hi, std::max(1, static_cast<int>(x.Span())));
  const Ticks& xt = ta.ticks;
  res.x_ticks = xt.values;
  res.x_style = ta.style;
  for (double v : xt.values) {
    float px = std::round(static_cast<float>(xm.ToPixel(v))) + 0.5f;
    if (px < p0.x || px > p1.x) continue;
    dl->AddLine({px, p0.y}, {px, p1.y}, theme.grid);
    std::string label = spec.time_x ? FormatTime(v, ta.style, xt.step) : FormatValueTick(v, xt.step);
    res.x_labels.push_back(label);
    ImVec2 ts = ImGui::CalcTextSize(label.c_str());
    dl->AddText({px - ts.x * 0.5f, p1.y + fh * 0.2f}, theme.tick_text, label.c_str());
  }
  ImU32 axis_col[2] = {theme.tick_text, theme.tick_text};
  if (has_right)
    for (const Trace& t : spec.traces)
      if (axis_col[t.axis] == theme.tick_text) axis_col[t.axis] = t.colour;
  for (int a = 0; a < 2; ++a) {
    if (a == 1 && !has_right) break;
    Ticks yt = NiceTicks(res.y[a].lo, res.y[a].hi, std::max(2, static_cast<int>((p1.y - p0.y) / (fh * 3.0f))));
    for (double v : yt.values) {
      float py = std::round(static_cast<float>(ym[a].ToPixel(v))) + 0.5f;
      if (a == 0) dl->AddLine({p0.x, py}, {p1.x, py}, theme.grid);
      std::string label = FormatValueTick(v, yt.step);
      ImVec2 ts = ImGui::CalcTextSize(label.c_str());
      float tx = a == 0 ? p0.x - ts.x - fh * 0.4f : p1.x + fh * 0.4f;
      dl->AddText({tx, py - ts.y * 0.5f}, axis_col[a], label.c_str());
    }
  }
  // x title centred under the ticks; the y quantities are named in the legend.
  if (!spec.x_label.empty()) {
    res.x_title = spec.time_x ? fmt::format("{} ({})", spec.x_label, TimeStyleUnit(ta.style)) : spec.x_label;
    ImVec2 ts = ImGui::CalcTextSize(res.x_title.c_str());
    dl->AddText({0.5f * (p0.x + p1.x - ts.x), p1.y + fh * 1.25f}, theme.tick_text, res.x_title.c_str());
  }

  dl->PushClipRect(p0, p1, true);
  float thick = std::max(2.0f, fh / 8.0f);
  for (const HLine& l : spec.lines) {
    float py = std::round(static_cast<float>(ym[l.axis].ToPixel(l.value)));
    if (l.dashed)
      DashedHLine(dl, p0.x, p1.x, py, l.colour, thick * 0.75f, fh * 0.6f);
    else
      dl->AddLine({p0.x, py}, {p1.x, py}, l.colour, thick);
    std::string text = fmt::format("{} {}", l.label, FormatValueTick(l.value, 0.01));
    ImVec2 ts = ImGui::CalcTextSize(text.c_str());
    float ty = py - ts.y - 1 < p0.y ? py + 2 : py - ts.y - 1;  // below the line when it hugs the top
    dl->AddText({p1.x - ts.x - fh * 0.3f - (p1.x - p0.x) * 0.08f, ty}, l.colour, text.c_str());
  }
  for (const Trace& t : spec.traces) DrawTrace(dl, t, xm, ym[t.axis], p0.x, width, thick, spec.markers);

  // Legend, top left, with the latest value of each trace.
  float ly = p0.y + fh * 0.3f, lx = p0.x + fh * 0.5f;
  res.legend_max = p0;
  for (const Trace& t : spec.traces) {
    std::string text = t.name;
    if (!t.legend_note.empty())
      text += "  " + t.legend_note;
    else if (!spec.legend_values)
      ;
    else if (t.latest)
      text += fmt::format("  {:.3f} {}", *t.latest, t.unit);
    else if (t.ys && t.ys->size() > 0)
      text += fmt::format("  {:.3f} {}", t.ys->At(t.ys->size() - 1), t.unit);
    ImVec2 ts = ImGui::CalcTextSize(text.c_str());
    dl->AddRectFilled({lx - 4, ly - 2}, {lx + fh * 1.4f + ts.x + 4, ly + ts.y + 2}, (theme.plot_bg & 0x00FFFFFF) | 0xD0000000);
    dl->AddRectFilled({lx, ly + ts.y * 0.35f}, {lx + fh, ly + ts.y * 0.65f}, t.colour);
    dl->AddText({lx + fh * 1.4f, ly}, theme.tick_text, text.c_str());
    res.legend_max = {std::max(res.legend_max.x, lx + fh * 1.4f + ts.x + 4), ly + ts.y + 2};
    ly += ts.y + 4;
  }

  // Cursor read-out.
  if (in_plot) {
    res.hovered = true;
    float mx = io.MousePos.x;
    dl->AddLine({mx, p0.y}, {mx, p1.y}, theme.cursor);
    double at = xm.ToValue(mx);
    std::string tip = spec.time_x ? fmt::format("t = {}", FormatTimeTick(at, 1.0)) : fmt::format("{} = {:.1f}", spec.x_label, at);
    for (const Trace& t : spec.traces) {
      if (!t.xs || t.xs->empty()) continue;
      size_t i = NearestIndex(*t.xs, at);
      tip += fmt::format("\n{}: {:.4f} {}", t.name, t.ys->At(i), t.unit);
      float cy = static_cast<float>(ym[t.axis].ToPixel(t.ys->At(i)));
      dl->AddCircle({static_cast<float>(xm.ToPixel((*t.xs)[i])), cy}, thick * 2.5f, t.colour, 12, 1.5f);
    }
    ImGui::SetTooltip("%s", tip.c_str());
  }
  dl->PopClipRect();
  dl->AddRect(p0, p1, theme.plot_frame);
  (void)style;
  return res;
}

}  // namespace kp::ui
