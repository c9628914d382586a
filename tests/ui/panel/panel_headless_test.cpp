// The whole panel drawn into an ImGui context without a window or GPU, from a
// real database read by the real feed: the live view must plot the watched
// run over its full time and voltage span, and both tabs must draw. Under
// `make sanitize` this is where the panel's own code is leak-checked (the
// screenshot test's GL process cannot be, see ui/panel/check/screenshot_test.sh).
#include "ui/panel/panel.h"

#include <gtest/gtest.h>

#include "drivers/clock.h"
#include "rig/store.h"
#include "tests/support/test_support.h"

namespace kp::ui {
namespace {

NewRun AbortedRun() {
  NewRun r;
  r.cell_name = "panel-cell-3";
  r.chemistry = "li-ion";
  r.rated_mah = 1200.0;
  r.procedure_name = "panel-check";
  r.procedure_text = "cell li-ion rated 1200 mAh cutoff 3.000 V max-temp 50 degC\n";
  r.rig = "sim";
  return r;
}

class HeadlessPanel : public ::testing::Test {
 protected:
  void SetUp() override {
    ImGui::CreateContext();
    ImGuiIO& io = ImGui::GetIO();
    io.DisplaySize = {1400, 900};
    io.DeltaTime = 1.0f / 30.0f;
    io.IniFilename = nullptr;
    io.ConfigFlags |= ImGuiConfigFlags_NoMouse;
    fonts_ = LoadFonts(1.0f);
    unsigned char* px;
    int w, h;
    io.Fonts->GetTexDataAsRGBA32(&px, &w, &h);  // the atlas must exist before NewFrame
  }
  void TearDown() override { ImGui::DestroyContext(); }

  // Writes one aborted run: `n` samples one second apart from 4.10 V down by 0.5 mV each.
  int64_t WriteRun(const std::string& db, int n) {
    VirtualClock clock;
    auto store = Store::Open(db, clock);
    EXPECT_TRUE(store.ok());
    auto run = (*store)->BeginRun(AbortedRun());
    EXPECT_TRUE(run.ok());
    EXPECT_TRUE((*store)->BeginStep(*run, 0, "cc", "discharge 1 A", 0.0).ok());
    for (int k = 0; k < n; ++k)
      EXPECT_TRUE((*store)->AppendSample(*run, {k * 1.0, 4.10 - 0.0005 * k, 1.0, 25.0 + 0.01 * k, 0}).ok());
    EXPECT_TRUE((*store)->AddEvent(*run, n - 1.0, "abort", "temperature 51.0 degC above 50 degC").ok());
    EXPECT_TRUE((*store)->FinishRun(*run, Outcome::kAborted, "over-temperature").ok());
    EXPECT_TRUE((*store)->Commit().ok());
    return *run;
  }

  // A running run paused by an operator: `n` samples at 1 A, then the
  // runner's pause event and 60 load-off samples. Not finished: this
  // process is its runner of record, so it stays "running".
  int64_t WritePausedRun(const std::string& db, int n) {
    VirtualClock clock;
    auto store = Store::Open(db, clock);
    EXPECT_TRUE(store.ok());
    auto run = (*store)->BeginRun(AbortedRun());
    EXPECT_TRUE(run.ok());
    EXPECT_TRUE((*store)->BeginStep(*run, 0, "discharge", "discharge 1 A", 0.0).ok());
    for (int k = 0; k < n; ++k)
      EXPECT_TRUE((*store)->AppendSample(*run, {k * 1.0, 4.10 - 0.0005 * k, 1.0, 25.0 + 0.01 * k, 0}).ok());
    EXPECT_TRUE((*store)->AddEvent(*run, n - 1.0, "control", "paused by panel").ok());
    for (int k = n; k < n + 60; ++k)
      EXPECT_TRUE((*store)->AppendSample(*run, {k * 1.0, 3.90, 0.0, 25.0 + 0.01 * n, 0}).ok());
    EXPECT_TRUE((*store)->Commit().ok());
    return *run;
  }

  // Draws frames until the feed has delivered everything (bounded).
  void DrawUntilLoaded(RunFeed& feed, Panel& panel) {
    DrawFrame(panel);  // tells the feed which runs to read
    ASSERT_TRUE(feed.WaitCaughtUp(30.0));
    for (int i = 0; i < 1000; ++i) {
      DrawFrame(panel);
      if (panel.state().Backlog() == 0 && !panel.state().watched.empty()) break;
    }
    DrawFrame(panel);
  }

  static void DrawFrame(Panel& panel) {
    ImGui::NewFrame();
    panel.Frame();
    ImGui::Render();
  }

  Fonts fonts_;
};

TEST_F(HeadlessPanel, LiveViewPlotsTheWholeRun) {
  testing::TempDir dir;
  const std::string db = dir.File("panel.db");
  const int n = 1800;
  int64_t run = WriteRun(db, n);

  RunFeed::Options fo;
  fo.db_path = db;
  RunFeed feed(fo);
  PanelOptions po;
  po.db_path = db;
  po.run_id = run;
  Panel panel(feed, po, fonts_);
  DrawUntilLoaded(feed, panel);

  ASSERT_TRUE(panel.selected());
  EXPECT_EQ(*panel.selected(), run);
  ASSERT_EQ(panel.state().runs.size(), 1u);
  EXPECT_EQ(panel.state().runs[0].state, "aborted");
  auto it = panel.state().watched.find(run);
  ASSERT_NE(it, panel.state().watched.end());
  EXPECT_EQ(it->second.SampleCount(), static_cast<size_t>(n));
  // Fewer block summaries than pixel columns: the panel asked for the raw
  // samples and draws them once they are in.
  ASSERT_TRUE(feed.WaitCaughtUp(30.0));
  DrawFrame(panel);
  EXPECT_EQ(it->second.window.size(), static_cast<size_t>(n));
  EXPECT_EQ(it->second.window.first_seq, 0);

  const PlotResult& p = panel.voltage_plot();
  EXPECT_GT(p.rect_max.x - p.rect_min.x, 200.0f);
  EXPECT_GT(p.rect_max.y - p.rect_min.y, 100.0f);
  // Auto-follow shows the whole run: first and last sample times inside the x range.
  EXPECT_LE(p.x.lo, 0.0);
  EXPECT_GE(p.x.hi, n - 1.0);
  // The voltage axis holds the data and the 3.000 V cutoff drawn with it.
  EXPECT_LE(p.y[0].lo, 4.10 - 0.0005 * (n - 1));
  EXPECT_GE(p.y[0].hi, 4.10);
}

const DrawnPlot* FindPlot(const Panel& panel, const std::string& name) {
  for (const DrawnPlot& p : panel.plots())
    if (p.name == name) return &p;
  return nullptr;
}

TEST_F(HeadlessPanel, AbortedRunShowsItsBadgeAndOwnStrips) {
  testing::TempDir dir;
  const std::string db = dir.File("panel.db");
  const int n = 1800;
  int64_t run = WriteRun(db, n);
  RunFeed::Options fo;
  fo.db_path = db;
  RunFeed feed(fo);
  PanelOptions po;
  po.db_path = db;
  po.run_id = run;
  Panel panel(feed, po, fonts_);
  DrawUntilLoaded(feed, panel);

  ASSERT_TRUE(panel.badge());
  EXPECT_EQ(panel.badge()->text, "ABORTED");
  EXPECT_EQ(panel.badge()->colour, panel.theme().alarm);
  // Voltage, current and temperature each on their own plot.
  ASSERT_EQ(panel.plots().size(), 3u);
  const DrawnPlot* temp = FindPlot(panel, "temperature");
  ASSERT_NE(temp, nullptr);
  ASSERT_EQ(temp->trace_colours.size(), 1u);
  EXPECT_EQ(temp->trace_colours[0], panel.theme().temperature);
  // The strip fits the temperatures (25 to 43 degC), not the 50 degC limit far above them.
  EXPECT_LE(temp->result.y[0].lo, 25.0);
  EXPECT_GE(temp->result.y[0].hi, 25.0 + 0.01 * (n - 1));
  EXPECT_LT(temp->result.y[0].hi, 48.0);
  // A half-hour run: the time axis is written m:ss and says so.
  EXPECT_EQ(panel.voltage_plot().x_style, TimeStyle::kMinSec);
  EXPECT_EQ(panel.voltage_plot().x_title, "time (m:ss)");
}

TEST_F(HeadlessPanel, PausedRunReadsPaused) {
  testing::TempDir dir;
  const std::string db = dir.File("panel.db");
  int64_t run = WritePausedRun(db, 900);
  RunFeed::Options fo;
  fo.db_path = db;
  RunFeed feed(fo);
  PanelOptions po;
  po.db_path = db;
  po.run_id = run;
  Panel panel(feed, po, fonts_);
  DrawUntilLoaded(feed, panel);

  ASSERT_TRUE(panel.badge());
  EXPECT_EQ(panel.badge()->text, "PAUSED");
  EXPECT_EQ(panel.badge()->colour, panel.theme().caution);
  ASSERT_EQ(panel.state().runs.size(), 1u);
  EXPECT_EQ(panel.state().runs[0].state, "paused");  // the runs list too, not "running"
}

TEST_F(HeadlessPanel, CompareTabDrawsTwoRuns) {
  testing::TempDir dir;
  const std::string db = dir.File("panel.db");
  int64_t a = WriteRun(db, 600);
  int64_t b = WriteRun(db, 900);

  RunFeed::Options fo;
  fo.db_path = db;
  RunFeed feed(fo);
  PanelOptions po;
  po.db_path = db;
  po.tab = Tab::kCompare;
  po.compare = {a, b};
  Panel panel(feed, po, fonts_);
  DrawUntilLoaded(feed, panel);

  EXPECT_EQ(panel.state().runs.size(), 2u);
  ASSERT_EQ(panel.state().watched.count(a), 1u);
  ASSERT_EQ(panel.state().watched.count(b), 1u);
  EXPECT_EQ(panel.state().watched.at(a).SampleCount(), 600u);
  EXPECT_EQ(panel.state().watched.at(b).SampleCount(), 900u);
  // Both overlays drawn; no state badge in the compare view.
  EXPECT_NE(FindPlot(panel, "compare by charge"), nullptr);
  EXPECT_NE(FindPlot(panel, "compare by time"), nullptr);
  EXPECT_FALSE(panel.badge());
}

}  // namespace
}  // namespace kp::ui
