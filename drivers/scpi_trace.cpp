#include "drivers/scpi_trace.h"

#include <chrono>
#include <cstdio>
#include <cstring>
#include <ctime>
#include <memory>
#include <mutex>

#include <fmt/format.h>

namespace kp {
namespace {

struct TraceFile {
  std::mutex mu;
  std::FILE* f = nullptr;
  ~TraceFile() {
    if (f != nullptr) std::fclose(f);
  }
};

std::string WallStamp() {
  auto now = std::chrono::system_clock::now();
  std::time_t t = std::chrono::system_clock::to_time_t(now);
  auto ms = std::chrono::duration_cast<std::chrono::milliseconds>(now.time_since_epoch()).count() % 1000;
  std::tm tm{};
  gmtime_r(&t, &tm);
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%S", &tm);
  return fmt::format("{}.{:03}Z", buf, ms);
}

}  // namespace

Result<ScpiTraceHook> OpenTraceFile(const std::string& path) {
  auto file = std::make_shared<TraceFile>();
  file->f = std::fopen(path.c_str(), "a");
  if (file->f == nullptr) return IoError(fmt::format("cannot open trace file '{}': {}", path, std::strerror(errno)));
  return ScpiTraceHook([file](Seconds at, char direction, const std::string& address, std::string_view text) {
    std::string line = fmt::format("{}  t={:.3f}s  {}  {}  {}\n", WallStamp(), at.count(), address, direction, text);
    std::lock_guard<std::mutex> lock(file->mu);
    std::fputs(line.c_str(), file->f);
    std::fflush(file->f);
  });
}

}  // namespace kp
