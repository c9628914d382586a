// Helpers the benchmark programs share: a scratch folder, the size switches
// read from the environment, a wall-time stamp.
#pragma once

#include <chrono>
#include <cstdlib>
#include <filesystem>
#include <string>

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

}  // namespace kp::bench
