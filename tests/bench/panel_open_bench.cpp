// Opening a run in the panel, at two sizes in the same benchmark so the
// figure is a ratio: the time from starting the panel's reader (RunFeed) to
// the first frame drawn from complete data, and the peak resident memory
// that adds, for a finished run of 100 k samples and one of 1 M (10 M with
// KP_BENCH_LARGE=1, sizes / 100 with KP_BENCH_SMOKE=1). The panel is drawn
// headless (ImGui without a window, as tests/ui/panel_headless_test.cpp);
// "complete" means every block summary is in and, where the plot has more
// pixel columns than blocks, the raw samples it asked for are too.
// Target: open(1 M) <= 2 x open(100 k).
#include <benchmark/benchmark.h>
#include <imgui.h>

#include <string>

#include "bench_support.h"
#include "rig/store.h"
#include "ui/panel/panel.h"

namespace {

using kp::bench::BenchDir;
using kp::bench::Large;
using kp::bench::Smoke;
using kp::bench::WallSeconds;

using kp::bench::ResetPeak;
using kp::bench::StatusKb;
using kp::bench::WriteRun;

struct OpenFigures {
  double seconds = 0;
  double peak_bytes = 0;
  double held_bytes = 0;  // what the panel's arrays hold for the run
  bool ok = false;
};

void DrawFrame(kp::ui::Panel& panel) {
  ImGui::NewFrame();
  panel.Frame();
  ImGui::Render();
}

OpenFigures OpenOnce(const std::string& db, int64_t n, const kp::ui::Fonts& fonts) {
  OpenFigures f;
  const int64_t rss0 = StatusKb("VmRSS");
  ResetPeak();
  const double t0 = WallSeconds();
  {
    kp::ui::RunFeed::Options fo;
    fo.db_path = db;
    kp::ui::RunFeed feed(fo);
    kp::ui::PanelOptions po;
    po.db_path = db;
    po.run_id = 1;
    kp::ui::Panel panel(feed, po, fonts);
    for (int frame = 0; frame < 100000; ++frame) {
      DrawFrame(panel);
      auto it = panel.state().watched.find(1);
      if (it != panel.state().watched.end() && it->second.BacklogSize() == 0 &&
          static_cast<int64_t>(it->second.SampleCount()) == n && !panel.state().runs.empty()) {
        const kp::ui::RunData& d = it->second;
        const kp::ui::PlotResult& p = panel.voltage_plot();
        const double px = p.rect_max.x - p.rect_min.x;
        const kp::ui::Range x = d.DataX();
        if (static_cast<double>(d.overview.size()) >= px || d.window.Covers(x.lo, x.hi)) {
          f.seconds = WallSeconds() - t0;
          f.held_bytes = static_cast<double>(d.Bytes());
          f.ok = true;
          break;
        }
      }
      if (WallSeconds() - t0 > 120) break;
      feed.WaitCaughtUp(0.05);
    }
  }
  f.peak_bytes = static_cast<double>(StatusKb("VmHWM") - rss0);
  return f;
}

void BM_PanelOpenScaling(benchmark::State& state) {
  const int64_t small = Smoke() ? 1000 : 100000;
  const int64_t large = state.range(0) / (Smoke() ? 100 : 1);
  BenchDir dir("kneepoint-bench-panel-open");
  if (!WriteRun(dir.File("small.db"), small) || !WriteRun(dir.File("large.db"), large)) {
    state.SkipWithError("could not write the runs");
    return;
  }
  ImGui::CreateContext();
  ImGuiIO& io = ImGui::GetIO();
  io.DisplaySize = {1600, 1000};
  io.DeltaTime = 1.0f / 30.0f;
  io.IniFilename = nullptr;
  io.ConfigFlags |= ImGuiConfigFlags_NoMouse;
  kp::ui::Fonts fonts = kp::ui::LoadFonts(1.0f);
  unsigned char* px = nullptr;
  int w = 0, h = 0;
  io.Fonts->GetTexDataAsRGBA32(&px, &w, &h);
  double t_small = 0, t_large = 0, m_small = 0, m_large = 0, held_small = 0, held_large = 0;
  int64_t round = 0;
  for (auto _ : state) {
    // Alternate the order so neither size always gets the warm cache.
    for (int side = 0; side < 2; ++side) {
      const bool do_small = (side == 0) == (round % 2 == 0);
      OpenFigures f = do_small ? OpenOnce(dir.File("small.db"), small, fonts) : OpenOnce(dir.File("large.db"), large, fonts);
      if (!f.ok) {
        state.SkipWithError("the panel did not finish loading");
        ImGui::DestroyContext();
        return;
      }
      (do_small ? t_small : t_large) += f.seconds;
      (do_small ? m_small : m_large) = std::max(do_small ? m_small : m_large, f.peak_bytes);
      (do_small ? held_small : held_large) = f.held_bytes;
    }
    ++round;
  }
  ImGui::DestroyContext();
  const double rounds = static_cast<double>(round);
  state.counters["samples_small"] = static_cast<double>(small);
  state.counters["samples_large"] = static_cast<double>(large);
  state.counters["open_small_ms"] = t_small / rounds * 1e3;
  state.counters["open_large_ms"] = t_large / rounds * 1e3;
  state.counters["ratio_open"] = t_large / t_small;  // target <= 2 (1 M against 100 k)
  state.counters["peak_small_mb"] = m_small / 1e6;
  state.counters["peak_large_mb"] = m_large / 1e6;
  state.counters["held_small_mb"] = held_small / 1e6;
  state.counters["held_large_mb"] = held_large / 1e6;
}
BENCHMARK(BM_PanelOpenScaling)
    ->Apply([](benchmark::internal::Benchmark* b) {
      b->Arg(1000000);
      if (Large() && !Smoke()) b->Arg(10000000);
    })
    ->Unit(benchmark::kMillisecond)
    ->UseRealTime()
    ->Iterations(3);

}  // namespace
