// Reports on long runs, at two sizes in the same benchmark so the figures
// are ratios: `report --json` and `--html` of a finished run of 100 k samples
// and of 1 M (10 M with KP_BENCH_LARGE=1; sizes / 100 with KP_BENCH_SMOKE=1):
// the peak resident memory each adds, and the time against reading the same
// rows with a bare pass over them.
// Targets: peak(1 M) <= 1.5 x peak(100 k); report time of the large run
// <= 2 x the time of reading its rows.
#include <benchmark/benchmark.h>

#include <algorithm>
#include <nlohmann/json.hpp>
#include <string>

#include "bench_support.h"
#include "rig/store.h"
#include "ui/report/run_report.h"

namespace {

using kp::bench::BenchDir;
using kp::bench::Large;
using kp::bench::ResetPeak;
using kp::bench::Smoke;
using kp::bench::StatusKb;
using kp::bench::WallSeconds;
using kp::bench::WriteRun;

struct ReportFigures {
  bool ok = false;
  double seconds = 0, read_seconds = 0, peak_bytes = 0;
  size_t bytes_out = 0;
};

ReportFigures ReportOnce(const std::string& path) {
  ReportFigures f;
  kp::SteadyClock wall;
  auto store = kp::Store::Open(path, wall);
  if (!store.ok()) return f;
  // Reading the rows alone: the baseline.
  double t0 = WallSeconds();
  double sum = 0;
  if (!(*store)->ForEachSample(1, [&](const kp::Sample& s) {
                 sum += s.voltage_v;
                 return kp::Status::Ok();
               }).ok())
    return f;
  f.read_seconds = WallSeconds() - t0;
  benchmark::DoNotOptimize(sum);
  ResetPeak();
  const int64_t rss0 = StatusKb("VmRSS");
  t0 = WallSeconds();
  auto rep = kp::BuildRunReport(**store, 1);
  if (!rep.ok()) return f;
  std::string json = kp::RunReportJson(*rep).dump();
  std::string html = kp::RunReportHtml(*rep);
  f.seconds = WallSeconds() - t0;
  f.peak_bytes = static_cast<double>(std::max<int64_t>(0, StatusKb("VmHWM") - rss0));
  f.bytes_out = json.size() + html.size();
  f.ok = true;
  return f;
}

void BM_ReportScaling(benchmark::State& state) {
  const int64_t small = Smoke() ? 1000 : 100000;
  const int64_t large = state.range(0) / (Smoke() ? 100 : 1);
  BenchDir dir("kneepoint-bench-report");
  if (!WriteRun(dir.File("small.db"), small) || !WriteRun(dir.File("large.db"), large)) {
    state.SkipWithError("could not write the runs");
    return;
  }
  double t_small = 0, t_large = 0, read_large = 0, m_small = 0, m_large = 0;
  int64_t round = 0;
  for (auto _ : state) {
    for (int side = 0; side < 2; ++side) {
      const bool do_small = (side == 0) == (round % 2 == 0);
      ReportFigures f = ReportOnce(dir.File(do_small ? "small.db" : "large.db"));
      if (!f.ok) {
        state.SkipWithError("the report failed");
        return;
      }
      (do_small ? t_small : t_large) += f.seconds;
      if (!do_small) read_large += f.read_seconds;
      (do_small ? m_small : m_large) = std::max(do_small ? m_small : m_large, f.peak_bytes);
    }
    ++round;
  }
  const double rounds = static_cast<double>(round);
  state.counters["samples_small"] = static_cast<double>(small);
  state.counters["samples_large"] = static_cast<double>(large);
  state.counters["report_small_ms"] = t_small / rounds * 1e3;
  state.counters["report_large_ms"] = t_large / rounds * 1e3;
  state.counters["read_large_ms"] = read_large / rounds * 1e3;
  state.counters["ratio_report_read"] = t_large / std::max(read_large, 1e-9);  // target <= 2
  state.counters["peak_small_mb"] = m_small / 1e6;
  state.counters["peak_large_mb"] = m_large / 1e6;
  // Peak against the small run's, the small one floored at 1 MB: a peak
  // measured as extra resident memory can read 0 when freed pages are reused.
  state.counters["ratio_peak"] = m_large / std::max(m_small, 1e6);  // target <= 1.5
}
BENCHMARK(BM_ReportScaling)
    ->Apply([](benchmark::internal::Benchmark* b) {
      b->Arg(1000000);
      if (Large() && !Smoke()) b->Arg(10000000);
    })
    ->Iterations(1)
    ->Unit(benchmark::kMillisecond);

}  // namespace
