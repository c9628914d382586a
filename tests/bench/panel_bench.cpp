// Panel frame cost with a long run on screen, beside the same frame with an
// empty plot. Needs a display: run under
//   xvfb-run -a -s '-screen 0 1600x1000x24' ./build/tests/bench/kneepoint_panel_bench
// Counters: build_ms = CPU time to build the frame (reduction + ImGui draw
// lists), raster_ms = Mesa llvmpipe rasterisation + swap (machine-bound, not
// data-bound). Target: build_ms(2M) - build_ms(empty) < 5 ms.
#include <benchmark/benchmark.h>

#include <time.h>

#include <chrono>
#include <cmath>
#include <iostream>
#include <memory>

#include <imgui.h>

#include "drivers/clock.h"
#include "ui/panel/gl_window.h"
#include "ui/panel/plot_widget.h"
#include "ui/panel/run_feed.h"
#include "ui/panel/theme.h"

namespace {

std::unique_ptr<kp::ui::GlWindow> g_window;
kp::ui::Fonts g_fonts;

double g_build_cpu_ms = 0.0;

// CPU time of this thread: the frame build's own cost, unaffected by other
// processes competing for the cores.
double ThreadCpuMs() {
  timespec ts{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return ts.tv_sec * 1e3 + ts.tv_nsec / 1e6;
}

// A synthetic 1 Hz discharge: falling voltage with a knee, noise on all channels.
kp::Sample Synthetic(size_t k, size_t n) {
  double x = static_cast<double>(k) / static_cast<double>(std::max<size_t>(n, 1));
  double noise = std::sin(static_cast<double>(k) * 12.9898) * 0.004;
  return {static_cast<double>(k), 4.15 - 0.9 * x - 0.4 * std::pow(x, 12) + noise, 0.5 + noise, 24.0 + 3.0 * x + noise * 50, 0};
}

// The overview of an n-sample synthetic run, as the feed builds it from the
// stored block summaries.
void FillRun(kp::ui::RunData& d, size_t n) {
  kp::SampleSummary block;
  int64_t index = 0;
  for (size_t k = 0; k < n; ++k) {
    block.Add(Synthetic(k, n));
    if (block.count == kp::kSamplesPerBlock || k + 1 == n) {
      d.overview.Put({index++, block});
      block = kp::SampleSummary{};
    }
  }
  d.figures = kp::ui::RunningFigures(d.overview.Total());
  d.limits.cutoff_v = 2.75;
  d.limits.max_temp_c = 60.0;
}

// One frame of the live view's two plots (the panel's data-bearing part).
void DrawFrame(kp::ui::RunData& d, kp::ui::XView& view, const kp::ui::Theme& theme, double* build_ms, double* raster_ms) {
  static kp::SteadyClock wall;
  auto t0 = wall.Now();
  double c0 = ThreadCpuMs();
  g_window->BeginFrame();
  const ImGuiViewport* vp = ImGui::GetMainViewport();
  ImGui::SetNextWindowPos(vp->WorkPos);
  ImGui::SetNextWindowSize(vp->WorkSize);
  ImGui::Begin("bench", nullptr, ImGuiWindowFlags_NoDecoration);
  kp::ui::Range data_x = d.DataX();
  const auto& o = d.overview;
  kp::ui::PlotSpec v;
  v.data_x = data_x;
  v.traces.push_back({&o.t_s, &o.voltage, theme.voltage, "voltage", "V", 0, &o.t_end_s});
  v.lines.push_back({2.75, theme.cutoff, "cutoff", 0, false, true});
  float h = ImGui::GetContentRegionAvail().y;
  kp::ui::DrawPlot("##v", v, view, {0, h * 0.6f}, theme);
  kp::ui::PlotSpec c;
  c.data_x = data_x;
  c.y_label[0] = "A";
  c.y_label[1] = "°C";
  c.traces.push_back({&o.t_s, &o.current, theme.current, "current", "A", 0, &o.t_end_s});
  c.traces.push_back({&o.t_s, &o.temperature, theme.temperature, "temperature", "°C", 1, &o.t_end_s});
  kp::ui::DrawPlot("##c", c, view, {0, 0}, theme);
  ImGui::End();
  g_window->Render();
  auto t1 = wall.Now();
  g_build_cpu_ms += ThreadCpuMs() - c0;
  g_window->Rasterise();
  g_window->Present();
  g_window->WaitEvents(0);
  auto t2 = wall.Now();
  *build_ms += std::chrono::duration<double, std::milli>(t1 - t0).count();
  *raster_ms += std::chrono::duration<double, std::milli>(t2 - t1).count();
}

void BM_LiveViewFrame(benchmark::State& state) {
  kp::ui::RunData d;
  FillRun(d, static_cast<size_t>(state.range(0)));
  kp::ui::XView view;
  kp::ui::Theme theme = kp::ui::Theme::Night();
  double build = 0, raster = 0;
  g_build_cpu_ms = 0.0;
  for (auto _ : state) DrawFrame(d, view, theme, &build, &raster);
  state.counters["build_ms"] = build / static_cast<double>(state.iterations());
  state.counters["build_cpu_ms"] = g_build_cpu_ms / static_cast<double>(state.iterations());
  state.counters["raster_ms"] = raster / static_cast<double>(state.iterations());
  state.counters["samples"] = static_cast<double>(d.SampleCount());
}
BENCHMARK(BM_LiveViewFrame)->Arg(0)->Arg(2000000)->Arg(10000000)->Unit(benchmark::kMillisecond)->UseRealTime()->MinTime(2.0);

// While live: each frame the last block summary grows by two samples (1 Hz
// sampling, 2 Hz polling) and is replaced; the pyramid recomputes only its tail.
void BM_LiveViewFrameGrowing(benchmark::State& state) {
  kp::ui::RunData d;
  size_t n = static_cast<size_t>(state.range(0));
  FillRun(d, n);
  kp::ui::XView view;
  kp::ui::Theme theme = kp::ui::Theme::Night();
  double build = 0, raster = 0;
  g_build_cpu_ms = 0.0;
  size_t k = n;
  kp::SampleSummary last = d.overview.last;
  int64_t index = d.overview.last_index;
  for (auto _ : state) {
    for (size_t j = 0; j < 2; ++j, ++k) {
      if (last.count == kp::kSamplesPerBlock) {
        last = kp::SampleSummary{};
        ++index;
      }
      last.Add(Synthetic(k, n));
    }
    d.overview.Put({index, last});
    DrawFrame(d, view, theme, &build, &raster);
  }
  state.counters["build_ms"] = build / static_cast<double>(state.iterations());
  state.counters["build_cpu_ms"] = g_build_cpu_ms / static_cast<double>(state.iterations());
  state.counters["raster_ms"] = raster / static_cast<double>(state.iterations());
}
BENCHMARK(BM_LiveViewFrameGrowing)->Arg(2000000)->Unit(benchmark::kMillisecond)->UseRealTime()->MinTime(2.0);

// The reduction alone, no window: 2M raw samples to 1,500 pixel columns.
void BM_ReduceColumns(benchmark::State& state) {
  kp::ui::RawWindow w;
  size_t n = static_cast<size_t>(state.range(0));
  std::vector<kp::Sample> s;
  for (size_t k = 0; k < n; ++k) s.push_back(Synthetic(k, n));
  w.Append(s.data(), s.size());
  for (auto _ : state) {
    auto cols = kp::ui::ReduceColumns(w.t_s, w.voltage, 0.0, w.t_s.back(), 1500);
    benchmark::DoNotOptimize(cols.data());
  }
}
BENCHMARK(BM_ReduceColumns)->Arg(2000000)->Unit(benchmark::kMicrosecond);

// Taking in the overview of a 2M-sample run in one go (the first load of a finished run).
void BM_OverviewWholeRun(benchmark::State& state) {
  size_t n = static_cast<size_t>(state.range(0));
  for (auto _ : state) {
    kp::ui::RunData d;
    FillRun(d, n);
    benchmark::DoNotOptimize(d.overview.size());
  }
}
BENCHMARK(BM_OverviewWholeRun)->Arg(2000000)->Unit(benchmark::kMillisecond);

}  // namespace

int main(int argc, char** argv) {
  benchmark::Initialize(&argc, argv);
  kp::ui::GlWindow::Options o;
  o.width = 1600;
  o.height = 1000;
  o.vsync = false;
  auto w = kp::ui::GlWindow::Open(o);
  if (!w.ok()) {
    std::cerr << "panel bench needs a display (xvfb-run): " << w.status().message() << "\n";
    return 1;
  }
  g_window = std::move(*w);
  g_fonts = kp::ui::LoadFonts(1.0f);
  kp::ui::ApplyTheme(kp::ui::Theme::Night(), 1.0f);
  benchmark::RunSpecifiedBenchmarks();
  benchmark::Shutdown();
  g_window.reset();
  return 0;
}
