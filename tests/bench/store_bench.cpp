// Store logging throughput with production settings (WAL, batched commits).
#include <benchmark/benchmark.h>

#include <filesystem>

#include "rig/store.h"

namespace {

void BM_StoreAppendSamples(benchmark::State& state) {
  auto dir = std::filesystem::temp_directory_path() / "kneepoint-bench-store";
  std::filesystem::create_directories(dir);
  std::string path = (dir / "bench.db").string();
  for (const char* s : {"", "-wal", "-shm"}) std::filesystem::remove(path + s);
  kp::SteadyClock wall;
  auto store = kp::Store::Open(path, wall);
  if (!store.ok()) {
    state.SkipWithError(store.status().ToString().c_str());
    return;
  }
  auto run = (*store)->BeginRun({"bench-cell", "li-ion", 2500, "bench", "", "bench"});
  if (!run.ok()) {
    state.SkipWithError(run.status().ToString().c_str());
    return;
  }
  double t = 0;
  for (auto _ : state) {
    kp::Sample s{t, 3.7 - t * 1e-6, 0.5, 25.0, 0};
    t += 1.0;
    benchmark::DoNotOptimize((*store)->AppendSample(*run, s).ok());
  }
  (void)(*store)->Commit();
  state.SetItemsProcessed(state.iterations());
  store->reset();
  std::filesystem::remove_all(dir);
}
BENCHMARK(BM_StoreAppendSamples);

}  // namespace
