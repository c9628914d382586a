// The plot widget drawn into an ImGui context without a window or GPU: the
// draw lists it produces must put the trace where the data maps to.
#include "ui/panel/plot_widget.h"

#include <gtest/gtest.h>

#include <cmath>

namespace kp::ui {
namespace {

class HeadlessImGui : public ::testing::Test {
 protected:
  void SetUp() override {
    ImGui::CreateContext();
    ImGuiIO& io = ImGui::GetIO();
    io.DisplaySize = {900, 600};
    io.IniFilename = nullptr;
    unsigned char* px;
    int w, h;
    io.Fonts->GetTexDataAsRGBA32(&px, &w, &h);  // the atlas must exist before NewFrame
  }
  void TearDown() override { ImGui::DestroyContext(); }

  // Draws one plot filling a 900x600 window; returns the result and leaves draw data ready.
  PlotResult DrawOnce(const PlotSpec& spec, XView& view, const Theme& theme) {
    ImGui::NewFrame();
    ImGui::SetNextWindowPos({0, 0});
    ImGui::SetNextWindowSize({900, 600});
    ImGui::Begin("t", nullptr, ImGuiWindowFlags_NoDecoration);
    PlotResult r = DrawPlot("##p", spec, view, {0, 0}, theme);
    ImGui::End();
    ImGui::Render();
    return r;
  }

  // True when a vertex of colour `col` lies within `r` pixels of (x, y).
  static bool VertexNear(ImU32 col, float x, float y, float r) {
    ImDrawData* dd = ImGui::GetDrawData();
    for (int l = 0; l < dd->CmdListsCount; ++l)
      for (const ImDrawVert& v : dd->CmdLists[l]->VtxBuffer)
        if (v.col == col && std::fabs(v.pos.x - x) <= r && std::fabs(v.pos.y - y) <= r) return true;
    return false;
  }
};

TEST_F(HeadlessImGui, ManySamplesAreDrawnAsColumnsWhereTheDataMaps) {
  std::vector<double> t;
  std::vector<float> v;
  for (int k = 0; k < 200000; ++k) {
    t.push_back(k * 0.1);
    v.push_back(static_cast<float>(4.2 - 1.4 * k / 200000.0));
  }
  MinMaxPyramid p;
  p.Append(v.data(), v.size());
  Theme theme = Theme::Night();
  PlotSpec spec;
  spec.data_x = {t.front(), t.back()};
  spec.traces.push_back({&t, &p, theme.voltage, "voltage", "V", 0});
  spec.lines.push_back({2.75, theme.cutoff, "cutoff", 0, false, true});
  XView view;
  PlotResult r = DrawOnce(spec, view, theme);
  ASSERT_GT(r.rect_max.x - r.rect_min.x, 300.0f);
  // The axis covers the data and the cutoff line.
  EXPECT_LE(r.y[0].lo, 2.75);
  EXPECT_GE(r.y[0].hi, 4.2);
  AxisMap xm{r.x, r.rect_min.x, r.rect_max.x};
  AxisMap ym{r.y[0], r.rect_max.y, r.rect_min.y};
  for (int k = 5000; k < 200000; k += 15000) {
    float x = static_cast<float>(xm.ToPixel(t[static_cast<size_t>(k)]));
    float y = static_cast<float>(ym.ToPixel(v[static_cast<size_t>(k)]));
    EXPECT_TRUE(VertexNear(theme.voltage, x, y, 3.0f)) << "sample " << k << " at " << x << "," << y;
    // Nothing of the trace's colour a fifth of the plot height above it.
    EXPECT_FALSE(VertexNear(theme.voltage, x, y - 0.2f * (r.rect_max.y - r.rect_min.y), 3.0f)) << k;
  }
  float cy = static_cast<float>(ym.ToPixel(2.75));
  EXPECT_TRUE(VertexNear(theme.cutoff, r.rect_min.x + 100.0f, cy, 101.0f));
}

TEST_F(HeadlessImGui, ZoomedInDrawsARealLineThroughTheSamples) {
  std::vector<double> t = {0, 10, 20, 30, 40};
  std::vector<float> v = {3.0f, 3.5f, 3.2f, 3.9f, 3.1f};
  MinMaxPyramid p;
  p.Append(v.data(), v.size());
  Theme theme = Theme::Day();
  PlotSpec spec;
  spec.data_x = {0, 40};
  spec.traces.push_back({&t, &p, theme.voltage, "voltage", "V", 0});
  XView view;
  view.follow = false;
  view.range = {5, 35};
  PlotResult r = DrawOnce(spec, view, theme);
  EXPECT_DOUBLE_EQ(r.x.lo, 5.0);
  EXPECT_DOUBLE_EQ(r.x.hi, 35.0);
  AxisMap xm{r.x, r.rect_min.x, r.rect_max.x};
  AxisMap ym{r.y[0], r.rect_max.y, r.rect_min.y};
  // A thick line's vertices sit off the sample by half the width, more at a sharp corner (miter).
  for (size_t i = 1; i < 4; ++i)
    EXPECT_TRUE(VertexNear(theme.voltage, static_cast<float>(xm.ToPixel(t[i])), static_cast<float>(ym.ToPixel(v[i])), 5.0f)) << i;
}

// Wheel over the plot zooms about the pointer and stops following; a
// double-click goes back to the whole run.
TEST_F(HeadlessImGui, WheelZoomsAboutThePointer) {
  std::vector<double> t;
  std::vector<float> v;
  for (int k = 0; k <= 1000; ++k) {
    t.push_back(k);
    v.push_back(3.0f + 0.001f * static_cast<float>(k));
  }
  MinMaxPyramid p;
  p.Append(v.data(), v.size());
  Theme theme = Theme::Night();
  PlotSpec spec;
  spec.data_x = {0, 1000};
  spec.traces.push_back({&t, &p, theme.voltage, "voltage", "V", 0});
  XView view;
  ImGuiIO& io = ImGui::GetIO();
  io.MousePos = {-100, -100};
  PlotResult r0 = DrawOnce(spec, view, theme);  // lays out the plot
  float mx = r0.rect_min.x + 0.25f * (r0.rect_max.x - r0.rect_min.x);
  float my = 0.5f * (r0.rect_min.y + r0.rect_max.y);
  AxisMap xm0{r0.x, r0.rect_min.x, r0.rect_max.x};
  double at = xm0.ToValue(mx);
  io.MousePos = {mx, my};
  DrawOnce(spec, view, theme);  // hover registers
  io.MouseWheel = 2.0f;
  PlotResult r1 = DrawOnce(spec, view, theme);
  io.MouseWheel = 0.0f;
  EXPECT_FALSE(view.follow);
  EXPECT_NEAR(r1.x.Span(), r0.x.Span() * 0.85 * 0.85, 1e-6 * r0.x.Span());
  AxisMap xm1{r1.x, r1.rect_min.x, r1.rect_max.x};
  EXPECT_NEAR(xm1.ToValue(mx), at, 1e-6 * r0.x.Span());  // the value under the pointer stays put
  io.MouseDown[0] = true;
  DrawOnce(spec, view, theme);
  io.MouseDown[0] = false;
  DrawOnce(spec, view, theme);
  io.MouseDown[0] = true;
  DrawOnce(spec, view, theme);  // second click: a double-click
  io.MouseDown[0] = false;
  EXPECT_TRUE(view.follow);
  EXPECT_EQ(view.span, 0.0);
}

TEST(ResolveX, FollowKeepsTheNewestInView) {
  Range data{100.0, 5000.0};
  XView whole;
  Range r = ResolveX(whole, data);
  EXPECT_DOUBLE_EQ(r.lo, 100.0);
  EXPECT_GT(r.hi, 5000.0);
  XView window;
  window.span = 600.0;
  r = ResolveX(window, data);
  EXPECT_LT(r.lo, 4500.0);
  EXPECT_GT(r.hi, 5000.0);
  EXPECT_NEAR(r.Span(), 600.0, 1e-9);
  XView fixed;
  fixed.follow = false;
  fixed.range = {200.0, 300.0};
  r = ResolveX(fixed, data);
  EXPECT_DOUBLE_EQ(r.lo, 200.0);
  EXPECT_DOUBLE_EQ(r.hi, 300.0);
}

}  // namespace
}  // namespace kp::ui
