// Analysis speed: every figure of a 1,000,000-sample run (totals, per step,
// gaps, discharge span, verdict, DC-IR, pulses; not the HTML) against a bare
// trapezoid loop over the same data. Target: under 100 ms per analysis.
#include <benchmark/benchmark.h>

#include <chrono>
#include <cmath>
#include <vector>

#include "analysis/run_analysis.h"

namespace {

// A pulsed discharge: rest, then 0.2 A with a 2 A step of 10 s every 10 min,
// sampled every 0.5 s, plus one 15-minute gap.
const std::vector<kp::Sample>& Run() {
  static const std::vector<kp::Sample> samples = [] {
    std::vector<kp::Sample> s;
    s.reserve(1'000'000);
    double q_as = 0;
    for (int k = 0; k < 1'000'000; ++k) {
      double t = k * 0.5 + (k > 600'000 ? 900.0 : 0.0);
      int step = k < 2000 ? 0 : 1;
      double i = step == 0 ? 0.0 : (std::fmod(t, 600.0) < 10.0 ? 2.0 : 0.2);
      q_as += i * 0.5;
      double v = 4.15 - q_as / 3600.0 * 0.4 - i * 0.05;
      s.push_back({t, v, i, 22.0 + 2.0 * k / 1e6, step});
    }
    return s;
  }();
  return samples;
}

kp::RunContext Context() {
  kp::RunContext c;
  c.rated_mah = 2500;
  c.chemistry = "li-ion";
  c.cutoff_v = 2.75;
  c.brownout_v = 3.0;
  return c;
}

double BareTrapezoidMah(const std::vector<kp::Sample>& s) {
  double as = 0;
  for (size_t i = 1; i < s.size(); ++i) as += 0.5 * (s[i].current_a + s[i - 1].current_a) * (s[i].t_s - s[i - 1].t_s);
  return as / 3.6;
}

void BM_BareTrapezoid1M(benchmark::State& state) {
  const auto& s = Run();
  for (auto _ : state) benchmark::DoNotOptimize(BareTrapezoidMah(s));
  state.counters["samples"] = static_cast<double>(s.size());
}
BENCHMARK(BM_BareTrapezoid1M)->Unit(benchmark::kMillisecond);

void BM_AnalyseRun1M(benchmark::State& state) {
  const auto& s = Run();
  kp::RunContext ctx = Context();
  // The bare loop's time, measured here too, for the ratio counter.
  auto b0 = std::chrono::steady_clock::now();
  for (int k = 0; k < 5; ++k) benchmark::DoNotOptimize(BareTrapezoidMah(s));
  double bare_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - b0).count() / 5.0;
  size_t dcir = 0;
  double analysis_s = 0;
  for (auto _ : state) {
    auto t0 = std::chrono::steady_clock::now();
    kp::RunAnalysis a = kp::AnalyseRun(s, ctx);
    analysis_s += std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    dcir = a.dcir.size();
    benchmark::DoNotOptimize(a);
  }
  double per_run_s = analysis_s / static_cast<double>(state.iterations());
  state.counters["samples"] = static_cast<double>(s.size());
  state.counters["dcir_points"] = static_cast<double>(dcir);
  state.counters["ms_per_run"] = per_run_s * 1e3;
  state.counters["bare_ms"] = bare_s * 1e3;
  // Wall time of one full analysis over the bare trapezoid loop's.
  state.counters["ratio_to_bare"] = per_run_s / bare_s;
}
BENCHMARK(BM_AnalyseRun1M)->Unit(benchmark::kMillisecond);

}  // namespace
