// Helpers the benchmark programs share: a scratch folder, the size switches
// read from the environment, a wall-time stamp.
#pragma once

#include <chrono>
#include <cstdint>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <string>

#include "rig/store.h"

namespace kp::bench {

// A fresh folder under the system temp directory, removed at destruction.
struct BenchDir {
  std::filesystem::path dir;
  explicit BenchDir(const std::string& name) : dir(std::filesystem::temp_directory_path() / name) {
    std::filesystem::remove_all(dir);
    std::filesystem::create_directories(dir);
  }
  ~BenchDir() {
    std::error_code ec;
    std::filesystem::remove_all(dir, ec);
  }
  std::string File(const std::string& f) const { return (dir / f).string(); }
};

inline bool EnvFlag(const char* name) {
  const char* v = std::getenv(name);
  return v != nullptr && *v != '\0' && std::string(v) != "0";
}
// KP_BENCH_SMOKE=1: tiny sizes, for the smoke test in `make test`.
inline bool Smoke() { return EnvFlag("KP_BENCH_SMOKE"); }
// KP_BENCH_LARGE=1: adds the 10 M-sample sizes.
inline bool Large() { return EnvFlag("KP_BENCH_LARGE"); }

inline double WallSeconds() {
  return std::chrono::duration<double>(std::chrono::steady_clock::now().time_since_epoch()).count();
}

// A finished constant-current discharge of `n` samples at 100 ms, written
// through the store (one step record, as the engine writes it).
inline bool WriteRun(const std::string& path, int64_t n) {
  kp::SteadyClock wall;
  auto store = kp::Store::Open(path, wall);
  if (!store.ok()) return false;
  kp::NewRun nr{"bench-cell", "li-ion", 2500, "bench",
                "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n"
                "discharge 0.05C until voltage<=2.75V every=100ms\n",
                "sim"};
  auto run = (*store)->BeginRun(nr);
  if (!run.ok() || !(*store)->BeginStep(*run, 0, "constant-current discharge", "discharge 0.05C", 0.0).ok()) return false;
  for (int64_t k = 0; k < n; ++k) {
    const double x = static_cast<double>(k) / static_cast<double>(n);
    const double noise = static_cast<double>((k * 7919) % 1000) * 2e-6;
    kp::Sample s{static_cast<double>(k) * 0.1, 4.15 - 0.9 * x - noise, 0.125 + noise, 24.0 + 3.0 * x, 0};
    if (!(*store)->AppendSample(*run, s).ok()) return false;
  }
  if (!(*store)->EndStep(*run, static_cast<double>(n - 1) * 0.1, "voltage 2.750 V <= 2.750 V").ok()) return false;
  return (*store)->FinishRun(*run, kp::Outcome::kCompleted, "procedure complete").ok();
}

// Resident memory figures of this process (Linux /proc), in bytes: `key` is
// VmRSS (now) or VmHWM (peak since the last ResetPeak).
inline int64_t StatusKb(const char* key) {
  std::ifstream in("/proc/self/status");
  std::string line;
  const std::string k = std::string(key) + ":";
  while (std::getline(in, line))
    if (line.rfind(k, 0) == 0) return std::stoll(line.substr(k.size())) * 1024;
  return -1;
}
inline void ResetPeak() {
  std::ofstream clear("/proc/self/clear_refs");
  clear << "5";  // resets VmHWM to the present RSS
}

}  // namespace kp::bench
